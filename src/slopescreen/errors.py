"""The package's one exception tree (dependency free).

Each error also inherits the built-in it resembles, so callers that catch
``ValueError`` or ``OSError`` keep working. Messages name the file or the
parameter, what was received, what was expected and what to do.
"""


class SlopescreenError(Exception):
    """Base class of every error raised on purpose by slopescreen."""


class InputError(SlopescreenError, ValueError):
    """A user input (scenario, raster, parameter) is wrong; the run cannot start.

    The command line turns it into exit status 2 and one line of text.
    """


class ScenarioError(InputError):
    """The scenario file is malformed or holds an unknown key or a bad value."""


class RasterError(InputError):
    """A raster input cannot be used: missing, unreadable, wrong CRS or grid."""


class SolverError(SlopescreenError, RuntimeError):
    """A numerical solver did not reach a proven optimum."""


class InputWarning(UserWarning):
    """An input is accepted but unusual enough that the user should look at it."""
