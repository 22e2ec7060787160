"""Finding the masters in release folders.

:func:`discover` walks folders recursively and returns every file that holds
audio masterqc reads, judged by its first bytes (RIFF/RIFX/RF64/BW64 WAVE,
Sony Wave64, FORM AIFF/AIFC, Apple CAF, fLaC, and fLaC behind an ID3v2 tag), plus files whose name
ends in an audio extension even when their bytes do not look like audio (so
a damaged ``.wav`` becomes an error row instead of vanishing).

Skipped: hidden entries (name starting with ``.``), temporary and partial
files (``~`` suffix, ``~$`` prefix, ``.tmp``, ``.part``, ``.partial``,
``.crdownload``, ``.swp``), and the output folder of the run.  Symbolic links
are followed, but each real folder is entered once (keyed by device and
inode), so a link loop ends; a file reached twice is listed once.  A folder or
file that cannot be read is reported as a :class:`Problem`, and the walk goes on;
so is anything that is not a regular file (a FIFO, socket or device, also
behind a link): it is never opened, so a FIFO cannot stall the run.
"""

from __future__ import annotations

import os
import stat
from dataclasses import dataclass, field

#: extensions that make a file a candidate even when its bytes do not look like audio
AUDIO_EXTENSIONS = frozenset({".wav", ".wave", ".bwf", ".rf64", ".w64", ".aif", ".aiff", ".aifc", ".flac",
                              ".caf"})
#: the first 16 bytes of a Sony Wave64 file: the 'riff' GUID (the Wave64 format description)
W64_RIFF_GUID = bytes.fromhex("72696666" "2e91cf11" "a5d628db" "04c10000")
#: name endings of temporary or partial files (lower case)
TEMP_SUFFIXES = (".tmp", ".temp", ".part", ".partial", ".crdownload", ".swp", ".bak", "~")
TEMP_PREFIXES = ("~$", "#")
#: bytes read from each file to recognise its content
SNIFF_BYTES = 16


@dataclass(frozen=True)
class Found:
    """One master: ``path`` as reached, ``real`` (resolved), ``root`` (the folder argument it was found under), ``rel`` (posix path below root)."""

    path: str
    real: str
    root: str
    rel: str
    by_content: bool  #: True when the first bytes were recognised as audio


@dataclass(frozen=True)
class Problem:
    """A path the walk could not read or had to stop at, with the reason."""

    path: str
    message: str


@dataclass
class Discovery:
    files: list = field(default_factory=list)     #: :class:`Found`, sorted by (root, rel)
    problems: list = field(default_factory=list)  #: :class:`Problem`


def sniff_audio(head: bytes) -> str | None:
    """The container recognised from a file's first bytes (``"wav"``, ``"aiff"``, ``"flac"``), or None.

    ``head`` should be at least 12 bytes; an ID3v2 tag in front of FLAC is
    recognised from its header alone (the caller reads past it with :func:`sniff_file`).
    """
    if len(head) >= 12 and head[:4] in (b"RIFF", b"RIFX", b"RF64", b"BW64") and head[8:12] == b"WAVE":
        return "wav"
    if len(head) >= 12 and head[:4] == b"FORM" and head[8:12] in (b"AIFF", b"AIFC"):
        return "aiff"
    if head[:4] == b"fLaC":
        return "flac"
    if head[:4] == b"caff" and head[4:6] == b"\x00\x01":  # Apple CAF, file version 1
        return "caf"
    if head[:16] == W64_RIFF_GUID:
        return "w64"
    return None


def _id3_size(head: bytes) -> int | None:
    """Total size in bytes of an ID3v2 tag starting at ``head[0]`` (header, body, footer), or None."""
    if len(head) < 10 or head[:3] != b"ID3" or any(b & 0x80 for b in head[6:10]):
        return None
    body = (head[6] << 21) | (head[7] << 14) | (head[8] << 7) | head[9]
    footer = 10 if head[5] & 0x10 else 0
    return 10 + body + footer


def sniff_file(path) -> str | None:
    """The container of the file at ``path`` from its content, or None (OSError when unreadable,
    :class:`masterqc.fileio.NotRegularFile` for a FIFO, socket or device, never waiting on one)."""
    from masterqc.fileio import open_regular_file
    with open_regular_file(path) as f:
        head = f.read(SNIFF_BYTES)
        kind = sniff_audio(head)
        if kind is None:
            skip = _id3_size(head)
            if skip is not None:
                f.seek(skip)
                if f.read(4) == b"fLaC":
                    kind = "flac"
    return kind


def is_skipped_name(name: str) -> bool:
    """True for hidden, temporary and partial file or folder names."""
    low = name.lower()
    return name.startswith(".") or low.endswith(TEMP_SUFFIXES) or low.startswith(TEMP_PREFIXES)


def _rel(root: str, path: str) -> str:
    rel = os.path.relpath(path, root)
    return rel.replace(os.sep, "/")


def discover(roots, exclude=()) -> Discovery:
    """Every master under ``roots`` (folders or files), skipping ``exclude`` folders (e.g. the output folder).

    A file given directly is always a candidate (its root is its folder) unless it
    neither looks like audio nor has an audio extension, which is a :class:`Problem`.
    """
    out = Discovery()
    seen_dirs: set[tuple[int, int]] = set()
    seen_files: set[str] = set()
    excluded = set()
    for e in exclude:
        try:
            st = os.stat(e)
            excluded.add((st.st_dev, st.st_ino))
        except OSError:
            pass

    def consider(path: str, root: str, explicit: bool) -> None:
        real = os.path.realpath(path)
        if real in seen_files:
            return
        try:
            kind = sniff_file(path)
        except OSError as exc:
            # unreadable but named like audio: keep it, so it becomes an error row
            if os.path.splitext(path)[1].lower() in AUDIO_EXTENSIONS or explicit:
                seen_files.add(real)
                out.files.append(Found(path, real, root, _rel(root, path), False))
            else:
                out.problems.append(Problem(path, f"cannot be read ({exc.strerror or exc})"))
            return
        by_ext = os.path.splitext(path)[1].lower() in AUDIO_EXTENSIONS
        if kind is None and not by_ext:
            if explicit:
                out.problems.append(Problem(path, "is not an audio file masterqc reads "
                                                  "(no WAV, RF64, Wave64, AIFF, CAF or FLAC header)"))
            return
        seen_files.add(real)
        out.files.append(Found(path, real, root, _rel(root, path), kind is not None))

    def walk(folder: str, root: str) -> None:
        stack = [folder]
        while stack:
            d = stack.pop()
            try:
                st = os.stat(d)
            except OSError as exc:
                out.problems.append(Problem(d, f"folder cannot be read ({exc.strerror or exc})"))
                continue
            key = (st.st_dev, st.st_ino)
            if key in excluded:
                continue
            if key in seen_dirs:
                if os.path.islink(d):
                    out.problems.append(Problem(d, "link to a folder already walked (link loop or duplicate); not entered again"))
                continue
            seen_dirs.add(key)
            try:
                with os.scandir(d) as it:
                    entries = sorted(it, key=lambda e: e.name)
            except OSError as exc:
                out.problems.append(Problem(d, f"folder cannot be listed ({exc.strerror or exc})"))
                continue
            subdirs = []
            for e in entries:
                if is_skipped_name(e.name):
                    continue
                try:
                    is_dir = e.is_dir(follow_symlinks=True)
                    is_file = not is_dir and e.is_file(follow_symlinks=True)
                except OSError as exc:
                    out.problems.append(Problem(e.path, f"cannot be examined ({exc.strerror or exc})"))
                    continue
                if is_dir:
                    subdirs.append(e.path)
                elif is_file:
                    consider(e.path, root, False)
                else:
                    try:
                        st_e = os.stat(e.path)  # never opened: a FIFO or device would block or never end
                    except OSError:
                        if e.is_symlink():
                            out.problems.append(Problem(e.path, "broken symbolic link"))
                        continue
                    from masterqc.fileio import file_kind
                    via = " (through a symbolic link)" if e.is_symlink() else ""
                    out.problems.append(Problem(e.path, f"is {file_kind(st_e.st_mode)}{via}, not a regular file: "
                                                        "not checked"))
            stack.extend(reversed(subdirs))

    for r in roots:
        r = os.fspath(r)
        try:
            st = os.stat(r)
        except OSError as exc:
            out.problems.append(Problem(r, f"does not exist or cannot be read ({exc.strerror or exc})"))
            continue
        if stat.S_ISDIR(st.st_mode):
            walk(r, r)
        else:
            consider(r, os.path.dirname(r) or ".", True)
    out.files.sort(key=lambda f: (f.root, f.rel))
    return out
