"""Reading a file the user named: a regular file of bounded size, or a clear error."""

from __future__ import annotations

import stat as _stat
from pathlib import Path

from deviation.errors import CaseError
from deviation.inputs import limits


def read_bounded(path: Path, *, what: str, named_in: str | None = None) -> bytes:
    """The bytes of a regular file no larger than the limit; a clear CaseError otherwise.

    A FIFO, a device (``/dev/zero``), a folder or a file over ``file_size_max_bytes`` is refused
    before anything is read, so nothing can hang or fill the memory; the message names the file
    and never quotes what is in it.
    """
    source = named_in or str(path)
    limit = limits.current().file_size_max_bytes
    try:
        info = path.stat()
    except FileNotFoundError:
        raise CaseError(f"{what} file not found: {path}", source=source) from None
    except (OSError, ValueError) as exc:  # ValueError: a NUL byte in the path
        reason = getattr(exc, "strerror", None) or "not a usable path"
        raise CaseError(f"{what} {str(path)!r} cannot be opened: {reason}", source=source) from None
    if not _stat.S_ISREG(info.st_mode):
        kind = "a folder" if _stat.S_ISDIR(info.st_mode) else "not a regular file (a device, pipe or socket)"
        raise CaseError(f"{what} {path} is {kind}; expected a file", source=source)
    if info.st_size > limit:
        raise CaseError(f"{what} {path} is {info.st_size:,} bytes, over the {limit:,} bytes a file may have",
                        source=source)
    try:
        with path.open("rb") as fh:
            data = fh.read(limit + 1)
    except OSError as exc:
        raise CaseError(f"{what} {path} cannot be read: {exc.strerror}", source=source) from None
    if len(data) > limit:
        raise CaseError(f"{what} {path} grew past {limit:,} bytes while being read", source=source)
    return data


__all__ = ["read_bounded"]
