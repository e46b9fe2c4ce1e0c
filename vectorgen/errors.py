"""Errors and warnings of the engine.

Every failure the user should see is a `VectorgenError` with a one-line message in the tool's
own words; the command line prints it and exits with status 2. The subclasses say what kind of
thing was wrong, and are also the standard exception a library user would catch for it.
Messages name the engine's parameter and its value (``speed=-1``); the command line adds the
option that sets it. Warnings go through `warnings.warn` with `VectorgenWarning`.
"""

from __future__ import annotations

__all__ = ["VectorgenError", "InputError", "ProfileError", "FullScaleError", "DeviceError",
           "VectorgenWarning"]


class VectorgenError(Exception):
    """Bad input or an impossible request, explained in one line for the user.

    Parameters
    ----------
    message : str
        The line to show.
    parameter : str, optional
        The engine parameter the message is about (``"speed"``, ``"refresh"`` ...); the
        command line uses it to name the option that sets it.
    """

    def __init__(self, message: str, parameter: str | None = None):
        super().__init__(message)
        self.parameter = parameter


class InputError(VectorgenError, ValueError):
    """A drawing, sheet, capture, option value or other input that cannot be used."""


class ProfileError(VectorgenError, ValueError):
    """A tube profile key that is unknown, of the wrong type or impossible."""


class FullScaleError(VectorgenError, ValueError):
    """A sample would go beyond full scale: the drive cannot reach a point of the drawing."""


class DeviceError(VectorgenError, OSError):
    """The audio device or library is missing, refuses the settings, or stopped."""


class VectorgenWarning(UserWarning):
    """Something the user should know about a render that still goes ahead."""
