"""Writing files without losing anything: atomic replace, no silent overwrite.

Every file the tool writes (``--output``, plots, netlists, schematics) goes through
:func:`write_text` or :func:`write_bytes`:

- the data is written to a temporary file in the destination folder, flushed and
  synced, then moved into place with :func:`os.replace`, so a reader never sees a
  half-written file and an interrupted run leaves the old file untouched;
- an existing file is refused unless ``force`` is set;
- a destination that is one of the command's input files (the library, the brief,
  compared after resolving links and by inode), or an existing brief or library
  (``.toml``, ``.csv``) inside an input folder, is always refused, ``force`` or not.

Problems are raised as :class:`~selector.errors.InputError` naming the path, so
the command line reports them as one message with exit status 2.
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Iterable

from .errors import InputError


def same_file(a: str | os.PathLike, b: str | os.PathLike) -> bool:
    """True when two paths name the same file (after links; by inode if both exist)."""
    pa, pb = Path(a), Path(b)
    try:
        if pa.exists() and pb.exists():
            return os.path.samefile(pa, pb)
    except OSError:
        pass
    return pa.resolve() == pb.resolve()


#: files a command may read from an input folder (briefs, libraries)
READABLE_SUFFIXES = (".toml", ".csv")


def _inside(path: Path, folder: str | os.PathLike) -> bool:
    """True when ``path`` lies somewhere under ``folder`` (an input folder's files
    may be inputs themselves, so an existing file there is never replaced)."""
    try:
        path.resolve().relative_to(Path(folder).resolve())
        return True
    except ValueError:
        return False


def check_destination(path: str | os.PathLike, force: bool = False,
                      inputs: Iterable[str | os.PathLike] = ()) -> Path:
    """Check that ``path`` may be written; returns it as a :class:`Path`.

    Raises :class:`InputError` when ``path`` is an input of the command, is a
    folder, sits in a folder that does not exist, or exists and ``force`` is false.
    """
    target = Path(path)
    source = str(path)
    if not source.strip():
        raise InputError("--output: empty file name")
    for given in inputs:
        if given is None:
            continue
        if same_file(target, given) or (Path(given).is_dir() and target.is_file()
                                        and target.suffix.lower() in READABLE_SUFFIXES
                                        and _inside(target, given)):
            raise InputError(f"{source}: refusing to write over an input of this "
                             f"command ({given}); choose another output file")
    if target.is_dir():
        raise InputError(f"{source}: is a directory; give a file name for the output")
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(f"{source}: folder '{folder}' does not exist")
    if (target.exists() or target.is_symlink()) and not force:
        raise InputError(f"{source}: already exists; use --force to overwrite it")
    return target


def write_bytes(path: str | os.PathLike, data: bytes, force: bool = False,
                inputs: Iterable[str | os.PathLike] = ()) -> Path:
    """Write ``data`` to ``path`` atomically (temporary file + :func:`os.replace`)."""
    inputs = list(inputs)
    target = check_destination(path, force, inputs)
    folder = target.parent if str(target.parent) else Path(".")
    try:
        handle, temporary = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp",
                                             dir=folder)
    except OSError as exc:
        raise InputError(f"{path}: cannot write in '{folder}' ({exc.strerror})") from None
    try:
        with os.fdopen(handle, "wb") as stream:
            stream.write(data)
            stream.flush()
            os.fsync(stream.fileno())
        mode = _mode_for(target)
        os.chmod(temporary, mode)
        os.replace(temporary, target)
    except OSError as exc:
        _remove(temporary)
        raise InputError(f"{path}: cannot write ({exc.strerror})") from None
    except BaseException:
        _remove(temporary)
        raise
    return target


def write_text(path: str | os.PathLike, text: str, force: bool = False,
               inputs: Iterable[str | os.PathLike] = (), encoding: str = "utf-8") -> Path:
    """Write ``text`` to ``path`` atomically as UTF-8 (see :func:`write_bytes`)."""
    return write_bytes(path, text.encode(encoding), force, inputs)


def _mode_for(target: Path) -> int:
    """Keep the permissions of a file being replaced; else the umask's default."""
    try:
        return target.stat().st_mode & 0o7777
    except OSError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


def _remove(path: str) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass
