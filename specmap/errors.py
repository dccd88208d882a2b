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


class CoreInputError(SpecmapInputError):
    """A computation refuses its input, in the computation's own words.

    Core modules (grids, distance, perturbation runs, settings) know values, not files:
    they say which input is wrong (``subject``, e.g. ``"map"``, ``"route"``, ``"model"``),
    the value and what it should be. The pipeline and the CLI, which know the study file,
    attach ``file`` and ``field`` with :meth:`located` (typically ``field`` = the study key
    that gave ``subject``).

    Parameters
    ----------
    problem : str
        What is wrong: the value and the range or kind it should have.
    subject : str, optional
        The input of the computation that holds it (a parameter or setting name).
    file, field, fix : str, optional
        As for :class:`SpecmapInputError`.
    """

    def __init__(
        self,
        problem: str,
        *,
        subject: str | None = None,
        file: str | None = None,
        field: str | None = None,
        fix: str | None = None,
    ) -> None:
        self.subject = subject
        super().__init__(problem, file=file, field=field, fix=fix)

    def located(self, *, file: str | None = None, field: str | None = None) -> CoreInputError:
        """A copy of the same kind with missing file/field filled in (the subject is kept)."""
        return type(self)(
            self.problem,
            subject=self.subject,
            file=self.file or file,
            field=self.field or field,
            fix=self.fix,
        )


class InputValueError(CoreInputError, ValueError):
    """A value outside its range or not among its options (also a :class:`ValueError`)."""


class UnsupportedInputError(CoreInputError):
    """A well-formed input that this computation cannot handle (e.g. a rank-deficient map)."""


class StudyError(SpecmapInputError):
    """A study file is missing, malformed or inconsistent."""


class MissingInputError(UnsupportedInputError, StudyError):
    """A computation was not given an input it needs (a mesh, the grids of f and g).

    Also a :class:`StudyError`, the class these checks raised before they were core errors,
    so callers that catch it keep working.
    """


class ExpressionError(SpecmapInputError):
    """An expression is not in specmap's arithmetic whitelist."""


class MeshError(SpecmapInputError):
    """A mesh file cannot be read or is not a closed 2-manifold."""


class GridFileError(SpecmapInputError):
    """A grid JSON file breaks the specmap-grid/1 contract."""


class ResultsError(SpecmapInputError):
    """A result folder lacks the files a command needs."""
