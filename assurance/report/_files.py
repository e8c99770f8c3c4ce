"""Atomic, no-clobber file writing shared by the figure and memo writers."""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

from ..errors import AssuranceInputError


def check_target(path: str | os.PathLike[str], owner: str, overwrite: bool) -> Path:
    """Return ``path`` as a Path after checking it can be written, or raise."""
    target = Path(path)
    if target.is_dir():
        raise AssuranceInputError(
            f"{owner} needs a file name, but {str(target)!r} is a folder."
        )
    if not target.parent.is_dir():
        raise AssuranceInputError(
            f"{owner} cannot write {str(target)!r}: the folder {str(target.parent)!r} "
            "does not exist."
        )
    if target.exists() and not overwrite:
        raise AssuranceInputError(
            f"{owner} will not replace the existing file {str(target)!r}; "
            "pass overwrite=True to replace it."
        )
    return target


def _file_mode() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def write_atomic(path: Path, data: bytes, *, overwrite: bool, owner: str) -> Path:
    """Write ``data`` to ``path`` through a temporary file in the same folder.

    Without ``overwrite`` the final step is a hard link, which fails rather than replace a
    file that appeared in the meantime; where links are not supported it falls back to a
    checked rename.
    """
    target = check_target(path, owner, overwrite)
    fd, tmp_name = tempfile.mkstemp(dir=target.parent, prefix=f".{target.name}.", suffix=".tmp")
    tmp = Path(tmp_name)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(tmp, _file_mode())
        if overwrite:
            os.replace(tmp, target)
        else:
            try:
                os.link(tmp, target)
            except FileExistsError:
                raise AssuranceInputError(
                    f"{owner} will not replace the existing file {str(target)!r}; "
                    "pass overwrite=True to replace it."
                ) from None
            except OSError:  # no hard links on this file system
                if target.exists():
                    raise AssuranceInputError(
                        f"{owner} will not replace the existing file {str(target)!r}; "
                        "pass overwrite=True to replace it."
                    ) from None
                os.replace(tmp, target)
    finally:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
    return target
