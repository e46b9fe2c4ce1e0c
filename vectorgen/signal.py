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


CHUNK = 1 << 14        # samples corrected at a time by plan_channels


def plan_channels(plan, model: DeflectionModel, output, channels: int):
    """correct() then to_channels() for a whole beam plan: (signal, names, peak |drive|, the
    drive (n, 2) when it was made whole, else None).

    Without pincushion terms the correction is the same arithmetic sample by sample, so it
    runs in chunks that stay in cache, straight into the signal, and the full (n, 2) drive is
    never made. With them (Newton's iterations run on the whole frame at once), or when a
    chunk comes out beyond full scale (to be refused, or clipped within the slack), the frame
    goes through correct() and to_channels() as a whole."""
    if model.has_distortion:
        return _whole_frame(plan, model, output, channels)
    names = output.channel_order(channels)
    n = plan.samples
    sig = np.empty((n, len(names)), dtype=np.float32)
    cols = [(j, 0 if name == "x" else 1, name in output.invert)
            for j, name in enumerate(names) if name != "z"]
    zcols = [j for j, name in enumerate(names) if name == "z"]
    if zcols:                           # the Z level of every lit or blanked run
        zrun = _z_levels(plan, output)
        run_end = np.cumsum(plan.runs)
        run_start = run_end - plan.runs
    lo, hi = np.inf, -np.inf
    for c0 in range(0, n, CHUNK):
        c1 = min(n, c0 + CHUNK)
        d = model.drive_from_xy(*plan.positions(c0, c1))
        dlo, dhi = d.min(), d.max()
        if not (-1.0 <= dlo and dhi <= 1.0):
            return _whole_frame(plan, model, output, channels)
        lo, hi = min(lo, dlo), max(hi, dhi)
        for j, k, inv in cols:
            if inv:
                np.negative(d[:, k], out=sig[c0:c1, j], casting="same_kind")
            else:
                sig[c0:c1, j] = d[:, k]
        if zcols:
            r0 = int(np.searchsorted(run_end, c0, side="right"))
            r1 = int(np.searchsorted(run_end, c1 - 1, side="right")) + 1
            sizes = np.minimum(run_end[r0:r1], c1) - np.maximum(run_start[r0:r1], c0)
            z = np.repeat(zrun[r0:r1], sizes)
            for j in zcols:
                sig[c0:c1, j] = z
    return sig, names, (float(max(abs(lo), abs(hi))) if n else 0.0), None


def _whole_frame(plan, model, output, channels):
    drive = correct(plan, model)
    sig, names = to_channels(drive, plan, output, channels)
    return sig, names, (float(np.abs(drive).max()) if len(drive) else 0.0), drive


def _z_levels(plan, output) -> np.ndarray:
    """float32 Z of each run of a beam plan (lit on stroke i, blanked after it, in turn)."""
    S = len(plan.runs) // 2
    z = np.column_stack([plan.stroke_intensity,
                         np.full(S, output.z_blank_level, dtype=float)]).ravel()
    z = -z if output.z_polarity == "negative" else z
    return z.astype(np.float32)


def _z_channel(out: np.ndarray, plan, output) -> None:
    runs = getattr(plan, "runs", None)
    if runs is not None:        # a beam plan: one level per lit or blanked run
        out[...] = np.repeat(_z_levels(plan, output), runs)
    else:
        z = np.where(plan.lit, plan.intensity, output.z_blank_level)
        out[...] = -z if output.z_polarity == "negative" else z


def to_channels(drive: np.ndarray, plan, output, channels: int) -> tuple[np.ndarray, list[str]]:
    """(n, channels) float32 in the profile's channel order and polarity, and their names."""
    names = output.channel_order(channels)
    sig = np.empty((len(drive), len(names)), dtype=np.float32)
    for j, name in enumerate(names):
        out = sig[:, j]                 # written in place: no full-length temporaries
        if name == "z":
            _z_channel(out, plan, output)
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
