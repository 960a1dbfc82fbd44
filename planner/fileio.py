"""Writing output files atomically: a failed run never leaves a half-written file and
never clobbers the previous one."""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable
from contextlib import contextmanager
from pathlib import Path

from planner.errors import InputError

__all__ = ["atomic_path", "write_text_atomic", "write_atomic", "read_text", "save_workbook"]


@contextmanager
def atomic_path(target: str | Path, suffix: str | None = None):
    """Yield a temporary path in the target's folder; on success rename it over the target.

    If the body raises, the temporary file is removed and the target is untouched.
    """
    target = Path(target)
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.exists():
        raise InputError("the folder for this output does not exist", source=str(target))
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=suffix or target.suffix,
                               dir=folder)
    os.close(fd)
    tmp_path = Path(tmp)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp_path, 0o666 & ~umask)  # mkstemp makes 0600; give the usual mode
    try:
        yield tmp_path
        os.replace(tmp_path, target)
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
    path = Path(path)
    try:
        return path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise InputError("file not found", source=str(path)) from None
    except IsADirectoryError:
        raise InputError(f"this is a folder, not a {kind} file", source=str(path)) from None
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
