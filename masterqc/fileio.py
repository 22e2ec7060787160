"""Files as masterqc meets them: written so no reader sees half of one, read only when regular.

* :func:`write_atomic` writes through a temporary file and a rename, with the
  permissions any file the user creates would get (the umask applies).
* :func:`open_regular` opens a file for reading without ever blocking on a FIFO
  or a device, and refuses anything that is not a regular file.
* :func:`shown` turns a name (possibly not valid UTF-8, possibly holding
  newlines or terminal escape sequences) into text that is safe to print.
"""

from __future__ import annotations

import os
import stat
import tempfile

#: what a file type is called in messages
_KINDS = ((stat.S_ISFIFO, "a FIFO (named pipe)"), (stat.S_ISSOCK, "a socket"),
          (stat.S_ISCHR, "a character device"), (stat.S_ISBLK, "a block device"),
          (stat.S_ISDIR, "a directory"))


def file_kind(mode: int) -> str:
    """``"a FIFO (named pipe)"``, ``"a socket"``, ... for a ``st_mode`` that is not a regular file."""
    for test, name in _KINDS:
        if test(mode):
            return name
    return "not a regular file"


class NotRegularFile(OSError):
    """The path names a FIFO, socket, device or folder: masterqc reads only regular files."""

    def __init__(self, path, mode: int):
        self.kind = file_kind(mode)
        self.sentence = f"is {self.kind}, not a regular file; masterqc reads only regular files"
        super().__init__(self.sentence)
        self.strerror = self.sentence
        self.filename = path

    def __str__(self) -> str:
        return self.sentence


def current_umask() -> int:
    """The process umask, read without changing it where the system allows (Linux /proc)."""
    try:
        with open("/proc/self/status", "rb") as f:
            for line in f:
                if line.startswith(b"Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    old = os.umask(0o022)
    os.umask(old)
    return old


def write_atomic(path, data: bytes, durable: bool = True) -> None:
    """Write ``data`` to ``path`` through a temporary file in the same folder, then ``os.replace``.

    A reader sees the old file or the whole new one, never a partial one; on any
    error (including KeyboardInterrupt) the temporary file is removed and the
    error propagates.  The file gets mode ``0666 & ~umask`` (0644 under the usual
    022), like any file the user creates, not the 0600 of a temporary file.

    ``durable``: the data reaches the disk (``fsync``) before the rename, so a power
    cut leaves the old file or the new one.  ``False`` keeps the rename atomic for
    readers but leaves flushing to the system: for files a later run writes again
    anyway (a batch's per-file results, whose record of truth is the run ledger),
    where one ``fsync`` per file costs more than judging the file.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(prefix=".masterqc-", suffix=".tmp", dir=folder)
    try:
        mode = 0o666 & ~current_umask()
        if hasattr(os, "fchmod"):
            os.fchmod(fd, mode)
        else:  # pragma: no cover - systems without fchmod
            os.chmod(tmp, mode)
        with os.fdopen(fd, "wb") as f:
            f.write(data)
            if durable:
                f.flush()
                os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def open_regular(path) -> int:
    """A read-only file descriptor of ``path``, which must be a regular file (links followed).

    Opened with ``O_NONBLOCK`` so that a FIFO or a device never blocks the open;
    anything but a regular file raises :class:`NotRegularFile` (an ``OSError``).
    The descriptor is blocking again once it is known to be a regular file.
    """
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0) | getattr(os, "O_NOCTTY", 0)
    fd = os.open(path, flags)
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise NotRegularFile(path, st.st_mode)
        if hasattr(os, "set_blocking"):
            os.set_blocking(fd, True)
    except BaseException:
        os.close(fd)
        raise
    return fd


def open_regular_file(path):
    """:func:`open_regular` as a binary Python file object."""
    return os.fdopen(open_regular(path), "rb")


def check_regular(path) -> None:
    """Raise :class:`NotRegularFile` when ``path`` exists and is not a regular file (``os.stat``, never opens)."""
    st = os.stat(path)
    if not stat.S_ISREG(st.st_mode):
        raise NotRegularFile(path, st.st_mode)


def shown(text) -> str:
    """``text`` safe to print on a terminal or in a log line.

    Bytes that are not valid UTF-8 (kept by Python as surrogate escapes) show as
    ``\\xNN``; control characters (newline, tab, escape, the C1 range) and
    DEL show as ``\\n``, ``\\t``, ``\\x1b`` ...; everything else is unchanged.
    """
    if isinstance(text, bytes):
        text = os.fsdecode(text)
    text = str(text)
    if text.isprintable() and not any(0xDC80 <= ord(c) <= 0xDCFF for c in text):
        return text
    out = []
    for c in text:
        o = ord(c)
        if 0xDC80 <= o <= 0xDCFF:
            out.append(f"\\x{o - 0xDC00:02x}")
        elif c == "\n":
            out.append("\\n")
        elif c == "\t":
            out.append("\\t")
        elif c == "\r":
            out.append("\\r")
        elif o < 0x20 or 0x7F <= o < 0xA0:
            out.append(f"\\x{o:02x}")
        elif 0xD800 <= o <= 0xDFFF or o in (0x2028, 0x2029) or (not c.isprintable() and c != " "
                                                                  and o >= 0xA0 and _is_format_or_control(c)):
            out.append(f"\\u{o:04x}")
        else:
            out.append(c)
    return "".join(out)


def _is_format_or_control(c: str) -> bool:
    import unicodedata
    return unicodedata.category(c) in ("Cc", "Cf", "Cs", "Co", "Cn", "Zl", "Zp")


def text_safe(text: str) -> str:
    """``text`` with only the bytes that are not valid UTF-8 shown as ``\\xNN`` (for JSON, HTML, SQLite).

    Other characters, newlines included, are kept: the formats that take the
    text escape them their own way.
    """
    if text.isascii():
        return text
    try:
        text.encode("utf-8")  # fails exactly when the text holds a surrogate (U+D800..U+DFFF)
        return text
    except UnicodeEncodeError:
        pass
    return "".join(f"\\x{ord(c) - 0xDC00:02x}" if 0xDC80 <= ord(c) <= 0xDCFF
                   else (f"\\u{ord(c):04x}" if 0xD800 <= ord(c) <= 0xDFFF else c) for c in text)
