"""Safe file writes shared by every exporter: atomic, and never replacing a file unless asked."""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

from .validate import SummaryError

__all__ = ["write_atomic", "refuse_existing"]


def write_atomic(path, data: str | bytes, *, overwrite: bool = False) -> Path:
    """Write ``data`` to ``path`` through a temporary file in the same folder, then rename.

    Parameters
    ----------
    path : str or Path
        Destination file. Its folder must exist.
    data : str or bytes
        Text is written as UTF-8.
    overwrite : bool, default False
        Replace an existing file. Without it an existing file is never touched.

    Returns
    -------
    Path
        The written path.

    Raises
    ------
    FileExistsError
        ``path`` exists and ``overwrite`` is False (the message names the file).
    """
    path = Path(path)
    if isinstance(data, str):
        data = data.encode("utf-8")
    elif not isinstance(data, (bytes, bytearray)):
        raise SummaryError(f"`data` must be str or bytes; got {type(data).__name__}.")
    if not path.parent.is_dir():
        raise SummaryError(f"Cannot write {str(path)!r}: folder {str(path.parent)!r} does not exist.")
    if path.exists() and not overwrite:
        raise _exists_error([path])
    # Same folder so os.replace is a rename on one file system (atomic on POSIX and Windows).
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        # mkstemp makes the file private (0600); give it the mode a plain open() would.
        os.chmod(tmp, path.stat().st_mode & 0o7777 if path.exists() else 0o666 & ~_umask())
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        if not overwrite:
            # A file may have appeared since the check; os.link fails instead of replacing it.
            try:
                os.link(tmp, path)
            except FileExistsError:
                raise _exists_error([path]) from None
            except OSError:  # file systems without hard links: fall back to the checked rename
                if path.exists():
                    raise _exists_error([path]) from None
                os.replace(tmp, path)
        else:
            os.replace(tmp, path)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
    return path


def _umask() -> int:
    old = os.umask(0o022)  # the only portable way to read the umask is to set it and put it back
    os.umask(old)
    return old


def refuse_existing(paths, *, overwrite: bool = False) -> None:
    """Raise FileExistsError naming every path in ``paths`` that exists, unless ``overwrite``."""
    existing = [Path(p) for p in paths if Path(p).exists()]
    if existing and not overwrite:
        raise _exists_error(existing)


def _exists_error(paths) -> FileExistsError:
    names = ", ".join(repr(str(p)) for p in paths)
    what = "File" if len(paths) == 1 else "Files"
    return FileExistsError(
        f"{what} {names} already exist{'s' if len(paths) == 1 else ''}; refusing to replace "
        f"{'it' if len(paths) == 1 else 'them'}. Pass overwrite=True (command line: --overwrite) to replace, "
        "or choose another folder."
    )
