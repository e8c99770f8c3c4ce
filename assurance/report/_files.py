"""Shared by the figure and memo writers: atomic, no-clobber files and text safe to show."""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

from ..errors import AssuranceInputError

# invisible characters that reorder or hide text, besides control characters
_HIDDEN = frozenset("\u061c\u200e\u200f\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068"
                    "\u2069\ufeff")


def printable(text: str, *, line_breaks: bool = False) -> str:
    r"""``text`` with control characters, line separators and direction overrides escaped.

    Each such character is written as its Python escape (``\x1b``, ``\u202e``), so it is
    visible and harmless in a terminal, an HTML page or a figure. With ``line_breaks``, line
    breaks and tabs are kept as they are.

    Examples
    --------
    >>> printable("Trial\x1b[31m A")
    'Trial\\x1b[31m A'
    >>> printable("two\nlines"), printable("two\nlines", line_breaks=True)
    ('two\\nlines', 'two\nlines')
    """
    if text.isprintable():
        return text
    import unicodedata

    keep = "\n\t" if line_breaks else ""
    return "".join(
        ch if ch in keep or (ch not in _HIDDEN and unicodedata.category(ch)
                             not in ("Cc", "Zl", "Zp"))
        else ch.encode("unicode_escape").decode("ascii") for ch in text)


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
