"""One error hierarchy: InputError for what the user can fix, ComputeError for what a calculation did."""


class FourfoldError(Exception):
    """Base of every error fourfold raises on purpose."""


class InputError(FourfoldError, ValueError):
    """Bad formula, recipe, option or parameter: the message says what to fix, on one line (a line break or
    another control character echoed from the input is written as its escape)."""

    def __init__(self, message: str = ""):
        super().__init__(printable(str(message)))


def printable(text: str) -> str:
    """``text`` with every non-printable character (line breaks, escapes, NUL…) written as its escape."""
    return "".join(c if c.isprintable() else c.encode("unicode_escape").decode("ascii") for c in text)


def shown(value, limit: int = 60) -> str:
    """A value from the input as an error message quotes it: its repr, cut short past ``limit`` characters."""
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 1] + "…"


class ComputeError(FourfoldError, RuntimeError):
    """A calculation could not be set up or run."""


class NotConverged(ComputeError):
    """An SCF or a relaxation did not converge within its bounds."""


def describe_os_error(error: OSError) -> str:
    """An OSError as one line that says what to do: 'No space left on device: /study/records (free some
    space, then rerun the same command)'."""
    import errno

    what = error.strerror or type(error).__name__
    where = f": {error.filename}" if error.filename else ""
    hint = {errno.ENOSPC: "free some space, then rerun the same command",
            errno.EDQUOT: "free some space, then rerun the same command",
            errno.EACCES: "the folder must be writable: fix its permissions or choose another --out folder",
            errno.EPERM: "the folder must be writable: fix its permissions or choose another --out folder",
            errno.EROFS: "the file system is read-only: choose another --out folder"}.get(error.errno)
    return f"{what}{where}" + (f" ({hint})" if hint else "")
