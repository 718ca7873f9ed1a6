"""Exception and warning types shared by every layer.

Messages follow one template: what is wrong (the value given), the limit it breaks,
and how to fix it.  The widget shows the message verbatim in its status line.
"""

__all__ = ["SpecbenchError", "InputError", "SettingsError", "SpecbenchWarning", "Cancelled", "ComputeError"]


class SpecbenchError(Exception):
    """Base class of every error raised on purpose by specbench.

    ``field`` names the estimator field (or data-selection key) the error is about, and
    ``owner`` the estimator class name, when there is one (else None): the widget marks
    the control from them, never from the message text.
    """

    def __init__(self, *args: object, field: str | None = None, owner: str | None = None) -> None:
        super().__init__(*args)
        self.field = field
        self.owner = owner


class InputError(SpecbenchError, ValueError):
    """The data cannot be estimated as given (shape, length, non-finite samples, files)."""


class SettingsError(SpecbenchError, ValueError):
    """An estimator field or a settings file is invalid."""


class Cancelled(SpecbenchError):
    """A computation was stopped on request (raised by a ``progress`` callback, or by
    :meth:`specbench.estimators.CancelToken.cancel`); no partial result is returned."""


class ComputeError(SpecbenchError, RuntimeError):
    """A computation on a dask scheduler or cluster failed (a worker died, the scheduler
    does not answer); the message names what happened.  No partial result is returned."""


class SpecbenchWarning(UserWarning):
    """Something was adjusted or is statistically doubtful; the message says what."""
