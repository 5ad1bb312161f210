"""Writing output folders safely: never clobber, always atomic.

``--out DIR`` may be a new folder, an empty one, or one this tool wrote before (it carries a
marker file). Anything else is refused unless the user passes ``--force``. Each file is written to
a temporary name in the same folder and renamed into place, so an interrupted run never leaves a
half-written report.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Mapping
from pathlib import Path

from ..errors import OutputError

__all__ = ["MARKER", "prepare_output_folder", "write_all_atomic", "write_atomic"]

MARKER = ".causalcheck-output"


def prepare_output_folder(folder: str | Path, *, force: bool = False) -> Path:
    """Create ``folder`` or check that it is safe to write into; return it as a Path."""
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise OutputError(
            f"--out {str(folder)!r} is an existing file, not a folder; choose a folder name "
            "that does not exist yet (it will be created)")
    if folder.is_dir():
        try:
            entries = [p.name for p in folder.iterdir()]
        except OSError as e:
            raise OutputError(f"--out folder {str(folder)!r} cannot be read ({e.strerror}); "
                              "check its permissions or choose another folder") from None
        if entries and MARKER not in entries and not force:
            raise OutputError(
                f"--out folder {str(folder)!r} is not empty and was not written by causalcheck "
                f"({len(entries)} entr{'ies' if len(entries) != 1 else 'y'}, e.g. "
                f"{min(entries)!r}); nothing was written. "
                "Choose a new or empty folder, or pass --force to write into it anyway")
    else:
        try:
            folder.mkdir(parents=True)
        except OSError as e:
            raise OutputError(f"--out folder {str(folder)!r} cannot be created ({e.strerror}); "
                              "check the parent folder's permissions or choose another "
                              "place") from None
    if not os.access(folder, os.W_OK):
        raise OutputError(f"--out folder {str(folder)!r} is not writable; check its "
                          "permissions or choose another folder")
    write_atomic(folder / MARKER, "written by causalcheck; safe to overwrite\n")
    return folder


def write_atomic(path: str | Path, content: str | bytes) -> Path:
    """Write ``content`` to ``path`` through a temporary file and a rename.

    The bytes are flushed to disk before the rename, so ``path`` holds either its old content
    or all of the new; an error or an interruption leaves no temporary file behind. A failed
    write (a full disk, a quota) is an :class:`OutputError`.
    """
    path = Path(path)
    temporary = _stage(path, content)
    try:
        os.replace(temporary, path)
    except BaseException as error:
        _discard(temporary)
        if isinstance(error, OSError):
            raise _write_error(path, error) from None
        raise
    return path


def write_all_atomic(folder: str | Path, files: Mapping[str, str | bytes]) -> list[Path]:
    """Write several files into ``folder`` as one step, as far as a file system allows.

    Every file is first written in full to a temporary name; only when all of them are on disk
    are they renamed into place, in the order given. An error or an interruption before the
    renames leaves every file of the folder as it was (and no temporary file); the renames
    themselves take microseconds, so a report folder is practically never left half old and
    half new.
    """
    folder = Path(folder)
    staged: list[tuple[str, Path]] = []
    try:
        for name, content in files.items():
            path = folder / name
            staged.append((_stage(path, content), path))
        for index, (temporary, path) in enumerate(staged):
            os.replace(temporary, path)
            staged[index] = ("", path)
    except BaseException as error:
        for temporary, _ in staged:
            if temporary:
                _discard(temporary)
        if isinstance(error, OSError):
            raise _write_error(Path(getattr(error, "filename", None) or folder), error) \
                from None
        raise
    return [path for _, path in staged]


def _stage(path: Path, content: str | bytes) -> str:
    """Write ``content`` in full to a new temporary file beside ``path``; return its name."""
    data = content.encode("utf-8") if isinstance(content, str) else content
    try:
        handle, temporary = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp",
                                             dir=path.parent)
    except OSError as e:
        raise OutputError(f"cannot write {str(path)!r} ({e.strerror}); check the folder's "
                          "permissions") from None
    stream = None
    try:
        stream = os.fdopen(handle, "wb")
        # mkstemp creates the file 0600; give the report the permissions a normal write would
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(temporary, 0o666 & ~umask)
        stream.write(data)
        stream.flush()
        os.fsync(stream.fileno())       # the bytes are on disk before the name points at them
        stream.close()
    except BaseException as error:
        if stream is not None:
            stream.close()
        else:
            os.close(handle)
        _discard(temporary)
        if isinstance(error, OSError):
            raise _write_error(path, error) from None
        raise
    return temporary


def _discard(temporary: str) -> None:
    try:
        os.unlink(temporary)
    except OSError:
        pass


def _write_error(path: Path, error: OSError) -> OutputError:
    # a full disk, a quota, a folder removed under us: a clear message, not a traceback
    return OutputError(f"cannot write {str(path)!r} ({error.strerror or error}); it was left "
                       "as it was. Free some space or check the folder, then run again")
