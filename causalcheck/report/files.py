"""Writing output folders safely: never clobber, always atomic.

``--out DIR`` may be a new folder, an empty one, or one this tool wrote before (it carries a
marker file). Anything else is refused unless the user passes ``--force``. Each file is written to
a temporary name in the same folder and renamed into place, so an interrupted run never leaves a
half-written report.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from ..errors import OutputError

__all__ = ["prepare_output_folder", "write_atomic", "MARKER"]

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
                f"({len(entries)} entries, e.g. {sorted(entries)[0]!r}); nothing was written. "
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
    """Write ``content`` to ``path`` through a temporary file and a rename."""
    path = Path(path)
    data = content.encode("utf-8") if isinstance(content, str) else content
    try:
        handle, temporary = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp",
                                             dir=path.parent)
    except OSError as e:
        raise OutputError(f"cannot write {str(path)!r} ({e.strerror}); check the folder's "
                          "permissions") from None
    try:
        # mkstemp creates the file 0600; give the report the permissions a normal write would
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(temporary, 0o666 & ~umask)
        with os.fdopen(handle, "wb") as stream:
            stream.write(data)
        os.replace(temporary, path)
    except BaseException:
        try:
            os.unlink(temporary)
        except OSError:
            pass
        raise
    return path
