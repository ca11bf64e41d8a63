"""User-facing errors shared by every layer.

A :class:`UserError` is a problem with what the user gave us (a study file, a data file, a
storage URL).  The CLI prints it without a traceback and exits with code 2.  Every layer
raises it with as much location as it knows: file, line, column, dotted key path, the rule
and the value received.
"""
from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

__all__ = ["Problem", "UserError", "ensure_folder"]


@dataclass(frozen=True)
class Problem:
    """One located problem.  ``line``/``column`` are 1-based; 0 means unknown."""

    message: str
    file: str = ""
    line: int = 0
    column: int = 0
    path: str = ""

    def render(self) -> str:
        """``file:line:column: [key] message``; what is unknown is left out (an option's
        problem reads ``[--out] message``)."""
        where = self.file
        if where and self.line:
            where += f":{self.line}"
            if self.column:
                where += f":{self.column}"
        parts = [f"{where}:"] if where else []
        if self.path:
            parts.append(f"[{self.path}]")
        return " ".join(parts + [self.message])

    def to_dict(self) -> dict:
        return {"file": self.file, "line": self.line, "column": self.column,
                "path": self.path, "message": self.message}


@dataclass
class UserError(Exception):
    """One or more problems with user input (exit code 2, no traceback)."""

    problems: list[Problem] = field(default_factory=list)

    @classmethod
    def single(cls, message: str, *, file: str = "", line: int = 0, column: int = 0,
               path: str = "") -> "UserError":
        return cls([Problem(message, file=str(file), line=line, column=column, path=path)])

    def __str__(self) -> str:
        return "\n".join(p.render() for p in self.problems)


def ensure_folder(path, key: str, *, file: str = "") -> Path:
    """Create (when needed) a user-chosen output folder and make sure we can write in it.

    Args:
        path: the folder.
        key: what chose it, named in the error: an option (``"--out"``) or a study key
            (``"output.folder"``).
        file: the study file holding ``key``, when it is a study key.

    Returns:
        ``path`` as a :class:`~pathlib.Path`.

    Raises:
        UserError: the path is an existing file, lies under one, or cannot be written.
    """
    folder = Path(path)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as err:  # FileExistsError, NotADirectoryError, PermissionError, ...
        raise UserError.single(
            f"must be a folder that can be written, but {folder} cannot be made "
            f"({err.strerror or type(err).__name__})", file=str(file), path=key) from None
    # mkdir succeeds on an existing folder we may not write into; find that out now rather
    # than after minutes of work
    if not os.access(folder, os.W_OK | os.X_OK):
        raise UserError.single(f"must be a folder that can be written, but {folder} is "
                               "read-only for this user", file=str(file), path=key)
    return folder
