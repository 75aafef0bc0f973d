"""Exception hierarchy of heatsoak.

Every error a user can cause by bad input is an :class:`InputError`
(a ``ValueError``) whose message names the offending file, key or value
and, where it helps, what would have been accepted.
"""


class HeatsoakError(Exception):
    """Base class of every error raised by heatsoak."""


class InputError(HeatsoakError, ValueError):
    """Bad input given by the user: a file, a key, a value."""


class MeshError(InputError):
    """A mesh file that cannot be used (unreadable, no tetrahedra, broken)."""


class ScheduleError(InputError):
    """A schedule (constant, ramp, table) that is not valid."""


class CaseError(InputError):
    """A case description with one or more problems.

    Parameters
    ----------
    problems : list of str
        Every problem found, each naming file, key and value.
    """

    def __init__(self, problems):
        if isinstance(problems, str):
            problems = [problems]
        self.problems = list(problems)
        super().__init__("\n".join(self.problems))


class PathError(InputError):
    """A file named in a case that may not be read: missing, not a regular file, too large,
    or outside the folder it is confined to.

    Parameters
    ----------
    key : str
        Dotted case-file key that names the file (e.g. ``mesh.file``).
    value : object
        The name as given.
    detail : str
        What is wrong, without the key.
    """

    def __init__(self, key: str, value, detail: str):
        self.key, self.value, self.detail = key, value, detail
        super().__init__(f"{key} = {value!r}: {detail}")


class ImplausibleError(InputError):
    """A computed temperature no physical body can have (overflow, below absolute zero, hotter
    than any solid); the message names the inputs that drive it."""


class StabilityError(InputError):
    """A time step above the stability limit of an explicit theta-method."""


class ProbeError(InputError):
    """A probe point that is not inside the mesh."""


class SolverError(HeatsoakError):
    """A linear solve that failed (breakdown, no convergence)."""


class ResultsError(HeatsoakError):
    """A result file that cannot be written (disk full, no permission, a write error): the run
    stops, and what was written before stays readable."""


class Cancelled(HeatsoakError):
    """A run stopped by the user between two steps."""
