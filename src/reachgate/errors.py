"""The package's one error type: bad input that the CLI turns into exit code 2."""

from __future__ import annotations


class ReachgateError(Exception):
    """Bad input or a bad request: one line that names the file, line or key, and the fault.

    The CLI prints ``str(error)`` on stderr and exits with code 2, never a traceback.
    """


class ClusterLostError(ReachgateError):
    """A scan's Dask scheduler went away, or kept no worker for too long. The cases finished
    before are in the store; the CLI exits with its own code (3), not 2."""


class UndefinedValueError(ReachgateError):
    """A NaN or infinity reached a check: the case cannot be judged, so it must not pass.

    Raised where the value appears (which check, axis or stage, and when); the CLI treats it
    like any ReachgateError (one line on stderr, exit code 2), a scan stores the case as an
    error.
    """
