"""Bounded, confined reads of user-supplied files (configs, XYZ geometries, returned counts).

Every file a user names is read through :func:`read_user_text`: regular files only (a FIFO,
``/dev/zero`` or a folder is refused before it is opened for reading), at most ``limit`` bytes
(one byte more is read to detect a larger file, so a growing file cannot exhaust memory), UTF-8
text. Messages name the file and what to do; they never quote the file's content.
"""

from __future__ import annotations

import os
import stat

from .errors import ConfigError

__all__ = ["MAX_CONFIG_BYTES", "MAX_COUNTS_BYTES", "MAX_XYZ_BYTES", "read_user_text"]

#: Size caps (bytes). A sweep config is a few kB; 100,000 scan points in a list are about 1 MB.
MAX_CONFIG_BYTES = 2_000_000
#: An XYZ file of 150,000 atoms is about 7 MB; larger molecules are far beyond what the
#: simulators can treat.
MAX_XYZ_BYTES = 8_000_000
#: A counts file of 10^6 distinct bitstrings on 30 qubits is about 40 MB.
MAX_COUNTS_BYTES = 64_000_000


def read_user_text(
    path: str | os.PathLike, *, limit: int, what: str, error: type[Exception] = ConfigError
) -> str:
    """The text of a user-supplied file, read with a size cap.

    Args:
        path: the file.
        limit: largest accepted size in bytes.
        what: what the file is, for messages (``"config file"``, ``"XYZ file"``).
        error: exception type raised (a subclass of :class:`~eigensweep.errors.EigensweepError`).

    Returns:
        The decoded UTF-8 text.

    Raises:
        ``error``: one line naming the file: missing, not a regular file, too large,
        unreadable or not UTF-8 text.
    """
    name = os.fspath(path)
    try:
        st = os.stat(name)
    except FileNotFoundError:
        raise error(f"{name}: {what} not found; check the path") from None
    except OSError as exc:
        raise error(f"{name}: cannot read the {what} ({exc.strerror}); check the path") from None
    if not stat.S_ISREG(st.st_mode):
        raise error(
            f"{name}: the {what} is not a regular file; pass a file, not a folder or device"
        )
    if st.st_size > limit:
        raise error(f"{name}: the {what} is larger than {limit} bytes; is it the right file?")
    try:
        # O_NONBLOCK: should the path be swapped for a FIFO after the check, open does not hang
        fd = os.open(name, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
        with os.fdopen(fd, "rb") as fh:
            if not stat.S_ISREG(os.fstat(fh.fileno()).st_mode):
                raise error(f"{name}: the {what} is not a regular file; pass a file")
            data = fh.read(limit + 1)
    except OSError as exc:
        raise error(f"{name}: cannot read the {what} ({exc.strerror}); check the path") from None
    if len(data) > limit:
        raise error(f"{name}: the {what} is larger than {limit} bytes; is it the right file?")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        raise error(f"{name}: the {what} is not UTF-8 text; pass a text file") from None
