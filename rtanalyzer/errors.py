"""User-facing errors: each carries one line a person at the bench can act on."""


class RtaError(Exception):
    """Base of every error the CLI turns into one line on stderr and a non-zero exit."""

    exit_code = 2


class CaptureError(RtaError):
    """A capture file or stream that cannot be used (unreadable, empty, NaN, bad channel...)."""


class PlanError(RtaError):
    """A frequency plan that folds, collides, exceeds Nyquist or finds no tone."""


class MeasurementError(RtaError):
    """A measurement that cannot produce honest figures from the data given."""
