"""Exceptions with one-line messages meant for the user, not a traceback."""


class WindsolveError(Exception):
    """Base class: ``str(error)`` is a complete one-line message."""


class ModelError(WindsolveError, ValueError):
    """A model file or model argument is wrong; the message says how to fix it."""


class NoSolutionError(WindsolveError):
    """The model is valid but has no transonic solution; the message says why."""


class OutputError(WindsolveError):
    """An output file cannot be written or read."""
