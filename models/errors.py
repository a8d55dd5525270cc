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


class Cancelled(LagwiseError):
    """Long work stopped because the user asked for it."""


class LagwiseWarning(UserWarning):
    """Something worth telling the user that does not stop the work."""
