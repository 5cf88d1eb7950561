"""One error hierarchy for geosample.

Every error a user can cause is a :class:`GeosampleError`. Each subclass also
inherits the matching builtin, so ``except ValueError`` keeps working for
callers who do not know this package. The command line turns a
``GeosampleError`` into a one-paragraph message on stderr and exit code 2;
anything else is a bug and exits 1 with a traceback.

Messages name the setting or file, the value received, what is accepted, and
the fix, e.g.::

    raise SettingError("size.confidence", 1.5, "a number strictly between 0 and 1",
                       fix="write 0.95 for 95%")
"""
from __future__ import annotations

from typing import Any

__all__ = [
    "GeosampleError",
    "SettingError",
    "PlanError",
    "InputFileError",
    "LayerError",
    "InfeasibleError",
    "ResultsError",
    "OutputExistsError",
    "RegistrationError",
]


class GeosampleError(Exception):
    """Root of every error a user can cause; its text is meant for the user."""

    exit_code = 2


class SettingError(GeosampleError, ValueError):
    """A setting (command-line option or plan key) has a value that is not accepted.

    Parameters
    ----------
    setting : str
        The option or plan key, e.g. ``"--tolerance"`` or ``"size.tolerance"``.
    value : Any
        The value received.
    accepted : str
        What would be accepted, in words.
    fix : str, optional
        A concrete way to fix it.
    """

    def __init__(self, setting: str, value: Any, accepted: str, fix: str | None = None):
        self.setting = setting
        self.value = value
        self.accepted = accepted
        self.fix = fix
        msg = f"{setting} = {value!r} is not accepted: expected {accepted}."
        if fix:
            msg += f" {fix[0].upper()}{fix[1:]}" + ("" if fix.endswith(".") else ".")
        super().__init__(msg)


class PlanError(GeosampleError, ValueError):
    """The plan file cannot be read or is not a valid plan (syntax, unknown key, wrong type)."""


class InputFileError(GeosampleError, OSError):
    """An input file is missing, unreadable, or not of the expected kind."""


class LayerError(GeosampleError, ValueError):
    """A spatial layer is readable but unusable (no CRS, wrong geometry type, empty...)."""


class InfeasibleError(GeosampleError, ValueError):
    """The settings are valid one by one but cannot all be met (figures in the message)."""


class ResultsError(GeosampleError, ValueError):
    """A results file filled in by the field crew has problems (row numbers in the message)."""


class OutputExistsError(GeosampleError, FileExistsError):
    """An output file or folder exists and ``--overwrite`` was not given."""


class RegistrationError(GeosampleError, ValueError):
    """A registration file is unreadable, or a draw does not match its registration."""
