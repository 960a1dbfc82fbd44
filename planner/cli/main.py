"""The ``broodline`` command: argument parsing, dispatch and error handling.

Every sub-command lives in a module of this package that exposes ``register(sub)``;
its handler returns the exit code. User errors (:class:`planner.errors.BroodlineError`)
print one line each on stderr and exit with code 2, never with a traceback.
"""

from __future__ import annotations

import argparse
import contextlib
import os
import sys
import traceback
import warnings

from planner import __version__
from planner.errors import BroodlineError

__all__ = ["main", "build_parser"]

EXIT_OK = 0
EXIT_INTERNAL = 1
EXIT_USER = 2


class _Parser(argparse.ArgumentParser):
    """argparse that reports a bad command line in one line, exit code 2."""

    def error(self, message: str):  # noqa: D401 - argparse API
        raise _UsageError(f"{self.prog}: {message} (see '{self.prog} --help')")


class _UsageError(Exception):
    pass


def build_parser() -> argparse.ArgumentParser:
    from planner.cli import answer_cmds, demography_cmds, plan_cmds, risk_cmds, scenario_cmds

    parser = _Parser(
        prog="broodline",
        description="Production planning for insect mass-rearing facilities. Plans are "
                    "estimates from the colony's life table; biosafety, irradiation and "
                    "release rules are local matters for licensed staff.")
    parser.add_argument("--version", action="version", version=f"broodline {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    demography_cmds.register(sub)
    scenario_cmds.register(sub)
    plan_cmds.register(sub)
    answer_cmds.register(sub)
    risk_cmds.register(sub)
    return parser


class _Terminated(BaseException):
    """SIGTERM, raised in the main thread so that solver children are killed and
    temporary folders and half-written outputs are removed on the way out."""


def _on_term(signum, frame):
    raise _Terminated()


def _terminate_as_interrupt() -> None:
    import signal
    import threading
    if threading.current_thread() is threading.main_thread():
        with contextlib.suppress(ValueError, OSError):
            signal.signal(signal.SIGTERM, _on_term)


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns (and, as a console script, exits with) the code."""
    if argv is None:  # the console script: SIGTERM cleans up like Ctrl-C
        _terminate_as_interrupt()
    argv = sys.argv[1:] if argv is None else argv
    if not os.environ.get("BROODLINE_DEBUG"):
        # numpy's overflow warnings name a source line, not the input: the inputs are
        # bounded at reading and the model's rows are checked, so they are noise here
        warnings.filterwarnings("ignore", category=RuntimeWarning, module=r"(numpy|planner)")
    try:
        parser = build_parser()
        args = parser.parse_args(argv)
        return int(args.handler(args) or EXIT_OK)
    except _UsageError as exc:
        print(str(exc), file=sys.stderr)
        return EXIT_USER
    except BroodlineError as exc:
        for line in exc.lines():
            print(f"error: {line}", file=sys.stderr)
        return getattr(exc, "exit_code", EXIT_USER)
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except _Terminated:
        print("terminated", file=sys.stderr)
        return 143
    except SystemExit as exc:  # --help and --version
        return int(exc.code or 0) if isinstance(exc.code, int) else 0
    except BrokenPipeError:
        return EXIT_OK
    except Exception as exc:  # pragma: no cover - a bug, reported without a traceback
        if os.environ.get("BROODLINE_DEBUG"):
            traceback.print_exc()
        print(f"internal error: {type(exc).__name__}: {exc} (this is a bug in broodline; "
              "set BROODLINE_DEBUG=1 to see the traceback and please report it)",
              file=sys.stderr)
        return EXIT_INTERNAL


def _entry() -> None:  # pragma: no cover
    sys.exit(main())


if __name__ == "__main__":  # pragma: no cover
    _entry()
