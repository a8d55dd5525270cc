"""The project's own errors and warnings.

Every problem a user can cause (a bad file, an impossible model) is raised as a
`LagwiseError` subclass whose message is one readable line; the command line prints it
and exits 2, the window shows it in a dialog. Anything else is a bug.
"""

from __future__ import annotations


class LagwiseError(Exception):
    """A problem with the user's input, explained in one line."""


class DataError(LagwiseError):
    """A data file or column that cannot be read as a diary."""


class SpecError(LagwiseError):
    """A model specification that cannot be estimated."""


class EstimationError(LagwiseError):
    """Estimation could not start or produced no usable result."""


class ProjectError(LagwiseError):
    """A project file that cannot be opened or saved."""


class OutputError(LagwiseError, OSError):
    """A file the user asked for (a result, a table, a picture) that could not be written;
    the previous file, if any, is unchanged (models.atomic.write_output)."""


class FieldError(LagwiseError, ValueError):
    """A field of a JSON document with the wrong type, size or shape (models.jsonread).

    `where` is the field's path, e.g. "results.parameters[3].se" ("" for the document as a
    whole); `problem` says what is wrong, e.g. "should be a number, not text".
    """

    def __init__(self, where: str, problem: str) -> None:
        super().__init__(f"{where}: {problem}" if where else f"the document {problem}")
        self.where = where
        self.problem = problem

    def __reduce__(self):
        return type(self), (self.where, self.problem)


class Cancelled(LagwiseError):
    """Long work stopped because the user asked for it."""


class LagwiseWarning(UserWarning):
    """Something worth telling the user that does not stop the work."""
