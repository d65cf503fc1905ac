"""One error hierarchy: InputError for what the user can fix, ComputeError for what a calculation did."""


class FourfoldError(Exception):
    """Base of every error fourfold raises on purpose."""


class InputError(FourfoldError, ValueError):
    """Bad formula, recipe, option or parameter: the message says what to fix."""


class ComputeError(FourfoldError, RuntimeError):
    """A calculation could not be set up or run."""


class NotConverged(ComputeError):
    """An SCF or a relaxation did not converge within its bounds."""
