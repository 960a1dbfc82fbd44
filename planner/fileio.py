"""Writing output files atomically: a failed run never leaves a half-written file and
never clobbers the previous one."""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable
from contextlib import contextmanager
from pathlib import Path

from planner.errors import MAX_VALUE_CHARS, InputError, shorten

__all__ = ["atomic_path", "write_text_atomic", "write_atomic", "read_text", "save_workbook",
           "input_file", "output_file", "MAX_TEXT_BYTES", "MAX_WORKBOOK_BYTES", "short_name"]

#: Largest text input (TOML, CSV) read [bytes]: far above any real scenario or table.
MAX_TEXT_BYTES = 20_000_000
#: Largest input workbook read [bytes].
MAX_WORKBOOK_BYTES = 50_000_000
#: Longest file name shown in a message [characters]; longer ones are shortened.
MAX_NAME_CHARS = MAX_VALUE_CHARS


def short_name(path: str | Path, limit: int = MAX_NAME_CHARS) -> str:
    """A path as shown in a message (see :func:`planner.errors.shorten`)."""
    return shorten(str(path), limit)


def input_file(path: str | Path, kind: str, max_bytes: int) -> Path:
    """Check that ``path`` is a regular file of at most ``max_bytes`` before anything
    reads it: a missing file, a folder, a device or FIFO (which would hang or never end),
    a name the system refuses (too long) or an oversized file is one clear InputError.
    ``kind`` names the expected file ('CSV', 'TOML', '.xlsx workbook')."""
    import stat
    path = Path(path)
    shown = short_name(path)
    try:
        st = path.stat()  # follows links: a link to /dev/zero is a device
    except FileNotFoundError:
        raise InputError("file not found", source=shown) from None
    except OSError as exc:  # name too long, permission, a loop of links
        raise InputError(f"cannot open this file ({exc.strerror or type(exc).__name__})",
                         source=shown) from None
    if stat.S_ISDIR(st.st_mode):
        raise InputError(f"this is a folder, not a {kind} file", source=shown)
    if not stat.S_ISREG(st.st_mode):
        raise InputError(f"not a regular file (a device, pipe or socket); give a {kind} "
                         "file on disk", source=shown)
    if st.st_size > max_bytes:
        raise InputError(f"the file is {st.st_size:,} bytes, over the {max_bytes:,}-byte "
                         f"limit of a {kind} input", source=shown)
    return path


def _cannot_write(target: Path, kind: str, exc: OSError) -> InputError:
    return InputError(f"the {kind} cannot be written here "
                      f"({exc.strerror or type(exc).__name__}); choose another folder",
                      source=short_name(target))


def output_file(target: str | Path, kind: str = "output") -> Path:
    """Check, before any work, that ``target`` can be written: its folder exists and
    takes a new file, and the name is not a folder. A run that would fail only at the
    end (after a long solve) fails at once with one clear InputError instead."""
    target = Path(target)
    shown = short_name(target)
    folder = target.parent if str(target.parent) else Path(".")
    try:
        if target.is_dir():
            raise InputError(f"this is a folder; give a file name for the {kind}",
                             source=shown)
        if not folder.is_dir():
            raise InputError(f"the folder for the {kind} does not exist", source=shown)
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name[:100]}.", dir=folder)
    except InputError:
        raise
    except OSError as exc:
        raise _cannot_write(target, kind, exc) from None
    os.close(fd)
    os.unlink(tmp)
    return target


@contextmanager
def atomic_path(target: str | Path, suffix: str | None = None):
    """Yield a temporary path in the target's folder; on success rename it over the target.

    If the body raises, the temporary file is removed and the target is untouched.
    """
    target = Path(target)
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.exists():
        raise InputError("the folder for this output does not exist", source=str(target))
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name[:100]}.",
                                   suffix=suffix or target.suffix, dir=folder)
    except OSError as exc:
        raise _cannot_write(target, "output", exc) from None
    os.close(fd)
    tmp_path = Path(tmp)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp_path, 0o666 & ~umask)  # mkstemp makes 0600; give the usual mode
    try:
        yield tmp_path
        try:
            os.replace(tmp_path, target)
        except OSError as exc:  # e.g. the target is a folder
            raise _cannot_write(target, "output", exc) from None
    except BaseException:
        tmp_path.unlink(missing_ok=True)
        raise


def write_text_atomic(target: str | Path, text: str) -> Path:
    """Write text to ``target`` atomically; returns the path."""
    with atomic_path(target) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return Path(target)


def write_atomic(target: str | Path, writer: Callable[[Path], None]) -> Path:
    """Call ``writer(tmp_path)`` and move the result over ``target`` atomically."""
    with atomic_path(target) as tmp:
        writer(tmp)
    return Path(target)


def read_text(path: str | Path, kind: str, hint: str = "") -> str:
    """Read a UTF-8 text input file; a missing file, a folder or binary content is one
    clear InputError. ``kind`` names the expected file ('CSV', 'TOML')."""
    path = input_file(path, kind, MAX_TEXT_BYTES)
    try:
        with open(path, "rb") as f:
            data = f.read(MAX_TEXT_BYTES + 1)  # the file may grow after the check
        if len(data) > MAX_TEXT_BYTES:
            raise InputError(f"the file is over the {MAX_TEXT_BYTES:,}-byte limit of a "
                             f"{kind} input", source=short_name(path))
        return data.decode("utf-8-sig")
    except OSError as exc:
        raise InputError(f"cannot read this file ({exc.strerror or type(exc).__name__})",
                         source=short_name(path)) from None
    except UnicodeDecodeError:
        raise InputError("the file is not UTF-8 text" + (f" ({hint})" if hint else ""),
                         source=path.name) from None


def save_workbook(wb, target: str | Path) -> Path:
    """Save an openpyxl workbook atomically, without openpyxl stamping the current time
    into its document properties (the same content gives the same file)."""
    import zipfile

    from openpyxl.writer.excel import ExcelWriter

    def write(tmp: Path) -> None:
        with zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED, allowZip64=True) as archive:
            ExcelWriter(wb, archive).write_data()

    return write_atomic(target, write)
