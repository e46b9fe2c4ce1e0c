"""Times of day: the one parser for "HH:MM[:SS]" and the one split into hours, minutes, seconds."""

from __future__ import annotations

import math

from .errors import InputError

__all__ = ["DAY_S", "hms", "parse_time_of_day"]

DAY_S = 24 * 3600


def parse_time_of_day(text: str, what: str = "time") -> tuple[float, bool]:
    """Seconds since midnight of "HH:MM" or "HH:MM:SS" (seconds may have a fraction), and
    whether the seconds were given.

    Raises
    ------
    InputError
        Anything else, naming `what`.

    Examples
    --------
    >>> parse_time_of_day("10:42:05")
    (38525.0, True)
    >>> parse_time_of_day("07:30")
    (27000.0, False)
    """
    parts = str(text).strip().split(":")
    try:
        nums = [float(p) for p in parts]
    except ValueError:
        nums = []
    if len(nums) in (2, 3) and all(math.isfinite(n) and n >= 0 for n in nums) \
            and nums[0] < 24 and nums[1] < 60 and (len(nums) == 2 or nums[2] < 60) \
            and nums[0] == int(nums[0]) and nums[1] == int(nums[1]):
        return nums[0] * 3600 + nums[1] * 60 + (nums[2] if len(nums) == 3 else 0.0), \
            len(nums) == 3
    raise InputError(f"{what} must be HH:MM or HH:MM:SS (got {text!r})", parameter=what)


def hms(t: float) -> tuple[int, int, float]:
    """Hours (0-23), minutes and seconds of a time of day given in seconds.

    Examples
    --------
    >>> hms(38525.5)
    (10, 42, 5.5)
    """
    t = float(t) % DAY_S
    h = int(t // 3600)
    m = int((t - 3600 * h) // 60)
    return h, m, t - 3600 * h - 60 * m
