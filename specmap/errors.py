"""User-facing error types.

Every mistake a user can make in a study file, a mesh, a grid file or an
expression raises a subclass of :class:`SpecmapInputError`. The CLI turns it
into exactly one line ``file: field: problem; fix`` and exit status 2.
"""

from __future__ import annotations


class SpecmapInputError(Exception):
    """A user mistake, reported with the file, the field and the fix.

    Parameters
    ----------
    problem : str
        What is wrong, in one clause.
    file : str, optional
        The file that holds the mistake.
    field : str, optional
        The field (TOML key, JSON path, mesh array) that holds it.
    fix : str, optional
        What the user should do instead.
    """

    def __init__(
        self,
        problem: str,
        *,
        file: str | None = None,
        field: str | None = None,
        fix: str | None = None,
    ) -> None:
        self.problem = problem
        self.file = file
        self.field = field
        self.fix = fix
        super().__init__(self.one_line())

    def one_line(self) -> str:
        """The message as one line: ``file: field: problem; fix``."""
        parts = [p for p in (self.file, self.field) if p]
        head = ": ".join(parts + [self.problem])
        text = f"{head}; {self.fix}" if self.fix else head
        return " ".join(text.split())

    def located(self, *, file: str | None = None, field: str | None = None) -> SpecmapInputError:
        """Return a copy of the same kind with missing file/field filled in."""
        return type(self)(
            self.problem,
            file=self.file or file,
            field=self.field or field,
            fix=self.fix,
        )


class StudyError(SpecmapInputError):
    """A study file is missing, malformed or inconsistent."""


class ExpressionError(SpecmapInputError):
    """An expression is not in specmap's arithmetic whitelist."""


class MeshError(SpecmapInputError):
    """A mesh file cannot be read or is not a closed 2-manifold."""


class GridFileError(SpecmapInputError):
    """A grid JSON file breaks the specmap-grid/1 contract."""


class ResultsError(SpecmapInputError):
    """A result folder lacks the files a command needs."""
