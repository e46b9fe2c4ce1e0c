"""Clock face: 60 minute ticks, 12 longer hour ticks, numerals 1-12 and hands.

Angles are measured clockwise from 12 o'clock. The minute hand turns 6 degrees a minute
(360 / 60), the hour hand 0.5 degrees a minute (360 / 12 h / 60 min), the second hand 6 degrees
a second.
"""

from __future__ import annotations

import numpy as np

from vectorgen.strokes import Strokes, concat, strokes_from_polylines

from .text import text_strokes


def hand_angles(hours: float, minutes: float, seconds: float = 0.0) -> dict:
    """Clockwise angles from 12 o'clock, degrees, for the hour, minute and second hands."""
    total_min = (hours % 12) * 60.0 + minutes + seconds / 60.0
    return {"hour": (total_min * 0.5) % 360.0,
            "minute": ((minutes + seconds / 60.0) * 6.0) % 360.0,
            "second": (seconds * 6.0) % 360.0}


def _polar(r, angle_deg, center):
    a = np.radians(angle_deg)
    return center[0] + r * np.sin(a), center[1] + r * np.cos(a)


def clock_face(screen=None, hours: float = 10, minutes: float = 10, seconds: float | None = None,
               radius: float | None = None, center=(0.0, 0.0), numerals: bool = True) -> Strokes:
    """The clock at the given time. Radius defaults to 90 % of the largest that fits."""
    if radius is None:
        radius = 0.9 * min(screen.half_extent) if screen is not None else 40.0
    R = radius
    ticks, labels = [], []
    for m in range(60):
        inner = 0.86 * R if m % 5 == 0 else 0.93 * R
        ticks.append([_polar(inner, m * 6.0, center), _polar(R, m * 6.0, center)])
        labels.append(f"clock tick {m}")
    parts = [strokes_from_polylines(ticks, labels=labels)]
    if numerals:
        h = 0.12 * R
        for n in range(1, 13):
            cx, cy = _polar(0.70 * R, n * 30.0, center)
            parts.append(text_strokes(str(n), h, "center", (cx, cy)))
    ang = hand_angles(hours, minutes, seconds or 0.0)
    hands = [[center, _polar(0.50 * R, ang["hour"], center)],
             [center, _polar(0.80 * R, ang["minute"], center)]]
    hand_labels = ["hour hand", "minute hand"]
    if seconds is not None:
        hands.append([_polar(-0.12 * R, ang["second"], center), _polar(0.88 * R, ang["second"], center)])
        hand_labels.append("second hand")
    parts.append(strokes_from_polylines(hands, labels=hand_labels))
    return concat(parts)
