"""Exception types shared by every layer.

Every error names what went wrong and where: the file, the spec key path with
line and column, or the byte offset.  The CLI turns them into one line and an
exit code; nothing below the CLI prints.
"""

from __future__ import annotations


class MasterqcError(Exception):
    """Base class of masterqc's own errors."""


class AudioReadError(MasterqcError):
    """A file could not be opened or decoded as audio (CLI exit code 3).

    ``path`` is the file, ``cause`` a short human sentence, ``offset`` the byte
    offset where the problem lies when known.
    """

    def __init__(self, path, cause: str, offset: int | None = None):
        from masterqc.fileio import shown
        self.path = str(path)
        self.cause = cause
        self.offset = offset
        where = f" (at byte {offset})" if offset is not None else ""
        super().__init__(f"{shown(self.path)}: {cause}{where}")


class SpecError(MasterqcError):
    """A delivery spec is invalid (CLI exit code 2).

    ``problems`` is a list of ``(path, key_path, line, column, message)``;
    line and column are 1-based, ``None`` where unknown.
    """

    def __init__(self, problems):
        self.problems = list(problems)
        from masterqc.fileio import shown
        lines = []
        for path, key_path, line, column, message in self.problems:
            where = shown(path)
            if line is not None:
                where += f":{line}:{column}"
            key = f" {shown(key_path)}:" if key_path else ""
            lines.append(f"{where}:{key} {shown(message)}")
        super().__init__("\n".join(lines))


class UsageError(MasterqcError):
    """Bad invocation (CLI exit code 2)."""
