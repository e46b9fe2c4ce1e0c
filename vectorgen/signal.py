"""Correction and signal: beam plan (mm) -> drive (full scale +-1) -> interface channels.

Correction applies the exact inverse of the profile's deflection model, so the spot lands where
the drawing says. Nothing is ever clipped silently: a sample beyond full scale is an error that
names where in the drawing it happens.
"""

from __future__ import annotations

import numpy as np

from .deflection import DeflectionModel
from .errors import VectorgenError

FULL_SCALE_SLACK = 1e-9


def correct(plan, model: DeflectionModel) -> np.ndarray:
    """Drive values (n, 2) that put the spot on the plan's points."""
    drive = model.drive_from_xy(plan.x, plan.y)
    if drive.size and -1.0 <= drive.min() and drive.max() <= 1.0:
        return drive                # the usual case: all within full scale, nothing to clip
    over = np.abs(drive) > 1.0 + FULL_SCALE_SLACK
    if over.any():
        i = int(np.argmax(over.any(axis=1)))
        x, y = plan.points[i]
        s = plan.stroke[i]
        if s < 0:
            nxt = plan.stroke[i:][plan.stroke[i:] >= 0]
            where = ("a blanked move" + (f" towards {plan.strokes.labels[nxt[0]]}"
                                         if nxt.size else ""))
        else:
            where = plan.strokes.labels[s]
        axis = "x" if over[i, 0] else "y"
        raise VectorgenError(
            f"drive {axis} = {drive[i, 0 if axis == 'x' else 1]:+.4f} is beyond full scale at "
            f"({x:.2f}, {y:.2f}) mm in {where}: the profile's deflection cannot reach that point "
            f"(shrink the drawing or the usable area)")
    return np.clip(drive, -1.0, 1.0)   # removes only the FULL_SCALE_SLACK rounding


def to_channels(drive: np.ndarray, plan, output, channels: int) -> tuple[np.ndarray, list[str]]:
    """(n, channels) float32 in the profile's channel order and polarity, and their names."""
    names = output.channel_order(channels)
    sig = np.empty((len(drive), len(names)), dtype=np.float32)
    for j, name in enumerate(names):
        out = sig[:, j]                 # written in place: no full-length temporaries
        if name == "z":
            runs = getattr(plan, "runs", None)
            if runs is not None:        # a beam plan: one level per lit or blanked run
                S = len(runs) // 2
                z = np.column_stack([plan.stroke_intensity,
                                     np.full(S, output.z_blank_level, dtype=float)]).ravel()
                z = -z if output.z_polarity == "negative" else z
                out[...] = np.repeat(z.astype(np.float32), runs)
            else:
                z = np.where(plan.lit, plan.intensity, output.z_blank_level)
                out[...] = -z if output.z_polarity == "negative" else z
        else:
            col = drive[:, 0 if name == "x" else 1]
            if name in output.invert:
                np.negative(col, out=out, casting="same_kind")
            else:
                out[...] = col
    return sig, names


def from_channels(sig: np.ndarray, output, channels: int):
    """Undo to_channels: (drive (n, 2), beam intensity (n,) or None without Z)."""
    names = output.channel_order(channels)
    sig = np.asarray(sig, dtype=float)
    drive = np.zeros((len(sig), 2))
    z = None
    for j, name in enumerate(names):
        col = sig[:, j]
        if name == "z":
            z = -col if output.z_polarity == "negative" else col
            z = np.where(np.isclose(z, output.z_blank_level), 0.0, np.clip(z, 0.0, 1.0))
        else:
            drive[:, 0 if name == "x" else 1] = -col if name in output.invert else col
    return drive, z
