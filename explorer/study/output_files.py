"""The one way the kit writes a file: checked, then atomic.

Before writing, :func:`write_text_atomic` refuses a folder, a missing folder, a file
the caller is reading (the data file, the study file being replayed: compared by
resolved path and by device/inode, so links and other spellings are caught) and an
existing file unless ``overwrite=True`` or the file is one the caller owns (a study's
own earlier study file). It then writes a temporary file in the same folder, flushes
and fsyncs it, renames it over the target (``os.replace``, atomic on POSIX and
Windows) and fsyncs the folder. A failure at any point (full disk, file-size limit,
permission) removes the temporary file and leaves the old file as it was.
"""

from __future__ import annotations

import os
import secrets
from collections.abc import Iterable
from pathlib import Path

from ..engine.errors import OutputError

__all__ = ["write_text_atomic", "check_output_path", "same_file"]

PathLike = str | os.PathLike


def same_file(a: PathLike, b: PathLike) -> bool:
    """True when ``a`` and ``b`` name the same file: equal resolved paths or the same device and inode."""
    pa, pb = Path(a), Path(b)
    try:
        if pa.resolve() == pb.resolve():
            return True
    except (OSError, RuntimeError):
        pass
    try:
        return os.path.samefile(pa, pb)
    except (OSError, ValueError):
        return False


def check_output_path(
    path: PathLike,
    *,
    overwrite: bool = False,
    protect: Iterable[tuple[str, PathLike | None]] = (),
    own: Iterable[PathLike | None] = (),
) -> Path:
    """The path to write, after the refusals (see the module docstring); nothing is written.

    ``protect`` pairs a description with a path the caller reads ("data file",
    "study file"); those are never written over, even with ``overwrite=True``.
    ``own`` are files the caller wrote or loaded itself and may replace.
    """
    p = Path(os.fspath(path))
    if not str(p) or str(p) == ".":
        raise OutputError("no output file named; give a file name such as report.html")
    if p.is_dir():
        raise OutputError(f"{str(p)!r} is a folder; give a file name inside it, such as {str(p / 'report.html')!r}")
    parent = p.parent
    if not parent.is_dir():
        raise OutputError(f"folder {str(parent)!r} does not exist; create it or choose another")
    for what, other in protect:
        if other is not None and same_file(p, other):
            raise OutputError(f"will not write over the {what} {str(other)!r}: choose another output file")
    if p.exists() or p.is_symlink():
        if not p.is_file():
            raise OutputError(f"{str(p)!r} exists and is not a regular file; choose another output file")
        mine = any(o is not None and same_file(p, o) for o in own)
        if not (overwrite or mine):
            raise OutputError(f"{str(p)!r} exists; pass overwrite=True (command line: --force) to replace it")
    return p


def _fsync_folder(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:  # pragma: no cover - platforms without folder handles
        return
    try:
        os.fsync(fd)
    except OSError:  # pragma: no cover - some file systems refuse fsync on folders
        pass
    finally:
        os.close(fd)


def write_text_atomic(
    path: PathLike,
    text: str,
    *,
    overwrite: bool = False,
    protect: Iterable[tuple[str, PathLike | None]] = (),
    own: Iterable[PathLike | None] = (),
) -> Path:
    """Write ``text`` (UTF-8) to ``path`` atomically after :func:`check_output_path`; return the path.

    A link is followed: the file it points to is replaced, the link stays. The new file
    gets the old file's permission bits, or the usual ones (0666 less the umask).
    """
    p = check_output_path(path, overwrite=overwrite, protect=protect, own=own)
    target = p.resolve() if p.is_symlink() else p
    data = text.encode("utf-8")
    tmp = target.with_name(f".{target.name}.{secrets.token_hex(6)}.tmp")
    try:
        mode = os.stat(target).st_mode & 0o7777 if target.exists() else 0o666
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0), mode)
        try:
            view = memoryview(data)
            while view:
                written = os.write(fd, view)
                view = view[written:]
            os.fsync(fd)
        finally:
            os.close(fd)
        if target.exists():
            os.chmod(tmp, mode)  # the umask may have narrowed it at creation
        os.replace(tmp, target)
    except OSError as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        reason = exc.strerror or str(exc)
        raise OutputError(f"cannot write {str(p)!r}: {reason}; the old file, if any, is unchanged") from exc
    _fsync_folder(target.parent)
    return p
