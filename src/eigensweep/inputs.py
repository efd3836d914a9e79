"""Bounded, confined reads of user-supplied files (configs, XYZ geometries, returned counts).

Every file a user names is read through :func:`read_bounded` (:func:`read_user_text` for text): regular files only (a FIFO,
``/dev/zero`` or a folder is refused before it is opened for reading), at most ``limit`` bytes
(one byte more is read to detect a larger file, so a growing file cannot exhaust memory), UTF-8
text. Messages name the file and what to do; they never quote the file's content.
"""

from __future__ import annotations

import os
import stat

from .errors import ConfigError

__all__ = ["MAX_CONFIG_BYTES", "MAX_XYZ_BYTES", "read_bounded", "read_user_text"]

#: Size caps (bytes). A sweep config is a few kB; 100,000 scan points in a list are about 1 MB.
MAX_CONFIG_BYTES = 2_000_000
#: An XYZ file of 150,000 atoms is about 7 MB; larger molecules are far beyond what the
#: simulators can treat.
MAX_XYZ_BYTES = 8_000_000


def read_bounded(
    path: str | os.PathLike, limit: int, what: str, error: type[Exception] = ConfigError
) -> bytes:
    """The bytes of a user-supplied regular file of at most ``limit`` bytes.

    Args:
        path: the file.
        limit: largest accepted size in bytes.
        what: what the file is, for messages (``"config file"``, ``"counts file"``).
        error: exception type raised (a subclass of :class:`~eigensweep.errors.EigensweepError`).

    Raises:
        ``error``: one line naming the file: missing, not a regular file (FIFO, device,
        folder), larger than ``limit``, or unreadable. No content of the file is quoted.
    """
    name = os.fspath(path)
    try:
        st = os.stat(name)
        if not stat.S_ISREG(st.st_mode):
            raise error(f"{name}: {what} must be a regular file, not a device, pipe or folder")
        if st.st_size > limit:
            raise error(f"{name}: {what} is {st.st_size} bytes, above the {limit}-byte limit")
        # O_NONBLOCK: should the path be swapped for a FIFO after the check, open does not hang
        fd = os.open(name, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
        with os.fdopen(fd, "rb") as fh:
            if not stat.S_ISREG(os.fstat(fh.fileno()).st_mode):
                raise error(f"{name}: {what} must be a regular file, not a device, pipe or folder")
            data = fh.read(limit + 1)
    except FileNotFoundError:
        raise error(f"{name}: {what} not found; check the path") from None
    except OSError as exc:
        raise error(f"{name}: cannot read {what} ({exc.strerror}); check the path") from None
    if len(data) > limit:
        raise error(f"{name}: {what} grew past the {limit}-byte limit while being read")
    return data


def read_user_text(
    path: str | os.PathLike, *, limit: int, what: str, error: type[Exception] = ConfigError
) -> str:
    """The UTF-8 text of a user-supplied file, read by :func:`read_bounded`."""
    data = read_bounded(path, limit, what, error)
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        raise error(f"{os.fspath(path)}: {what} is not UTF-8 text; pass a text file") from None
