"""The arc-length layout of a frame: strokes on one global arc-length axis, and the samples of
the frame as blocks on it.

All strokes lie end to end on one axis s with a gap between them, so every stroke of the frame
is resampled by one `numpy.interp` call. A frame's samples are blocks: block b covers samples
start[b] .. end[b] - 1 at the parameters base + step * min(k + 1, move), k the sample's place in
its block (a piece moves `move` samples, then dwells on its end; a start block only dwells).
Blanked samples lie on the jumps instead (`at`, `blank_x`, `blank_y`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["GAP", "CHUNK", "arc_axis", "Layout", "ramp_distance"]

GAP = 1.0       # arc-length gap between strokes on the global axis (any positive number works)
CHUNK = 1 << 14     # vertices or samples worked on at a time


def arc_axis(px: np.ndarray, py: np.ndarray, is_last: np.ndarray, cos_corner: float):
    """The global arc-length axis s (P,) of vertices (px, py) and the sharp interior corners
    ((P,) bool: cos(turn) < cos_corner). `is_last` marks each stroke's last vertex (the step
    from it to the next stroke's first vertex is the GAP).

    Worked out CHUNK segments at a time (each chunk starts one segment early, for the corner at
    its first vertex; the running sum goes on from the last chunk's end), so the only
    full-length arrays are s and the corner flags.

    Examples
    --------
    >>> px, py = np.array([0.0, 3.0, 3.0]), np.array([0.0, 0.0, 4.0])
    >>> s, sharp = arc_axis(px, py, np.array([False, False, True]), np.cos(np.radians(35)))
    >>> s.tolist(), sharp.tolist()
    ([0.0, 3.0, 7.0], [False, True, False])
    """
    P = len(px)
    s = np.empty(P)
    s[0] = 0.0
    sharp = np.zeros(P, dtype=bool)
    for g0 in range(0, P - 1, CHUNK):
        g1 = min(P - 1, g0 + CHUNK)             # segments g0 .. g1 - 1 (segment i: i -> i + 1)
        a0 = max(g0 - 1, 0)
        dx, dy = np.diff(px[a0:g1 + 1]), np.diff(py[a0:g1 + 1])
        sq = dx * dx
        sq += dy * dy
        seg = np.empty(g1 - g0 + 1)             # the sum so far, then segment lengths
        seg[0] = s[g0]
        np.sqrt(sq[g0 - a0:], out=seg[1:])
        seg[1:][is_last[g0:g1]] = GAP           # a stroke's last vertex -> the next's first
        np.cumsum(seg, out=seg)
        s[g0 + 1:g1 + 1] = seg[1:]
        if len(dx) > 1:
            # turn > corner angle <=> cos(turn) = d_in . d_out / (|d_in| |d_out|) < cos(angle)
            dot = dx[:-1] * dx[1:]
            dot += dy[:-1] * dy[1:]
            norm = sq[:-1] * sq[1:]
            np.sqrt(norm, out=norm)
            norm *= cos_corner
            np.less(dot, norm, out=sharp[a0 + 1:g1])
    return s, sharp


@dataclass(frozen=True)
class Layout:
    """A frame's samples as blocks on the global arc-length axis.

    Attributes
    ----------
    s, px, py : (P,) arrays
        The axis and the vertices on it.
    pz : (P,) complex array
        The vertices as px + i py (one interpolation gives x and y: `positions`).
    start, end, move, step, base : (B,) arrays
        Block b covers samples start[b] .. end[b] - 1 at parameters
        base[b] + step[b] * min(k + 1, move[b]).
    at, blank_x, blank_y : (N_blank,) arrays
        The blanked samples and their positions (on the jumps), mm.
    ramp : (v_in, v_out, r_in, r_out) of (B,) arrays, or None
        An acceleration-limited block starts at speed v_in (axis units per sample), changes
        speed evenly over its first r_in samples to its step, cruises, and changes evenly to
        v_out over its last r_out samples (`ramp_distance`); its step is then the cruise
        speed. None: every block moves at its step from its first sample.
    """

    s: np.ndarray
    px: np.ndarray
    py: np.ndarray
    pz: np.ndarray
    start: np.ndarray
    end: np.ndarray
    move: np.ndarray
    step: np.ndarray
    base: np.ndarray
    at: np.ndarray
    blank_x: np.ndarray
    blank_y: np.ndarray
    ramp: tuple | None = None

    def positions(self, c0: int, c1: int) -> tuple[np.ndarray, np.ndarray]:
        """x and y (mm) of samples c0 .. c1 - 1, by linear interpolation along the axis."""
        b0 = int(np.searchsorted(self.end, c0, side="right"))
        b1 = int(np.searchsorted(self.end, c1 - 1, side="right")) + 1
        sizes = np.minimum(self.end[b0:b1], c1) - np.maximum(self.start[b0:b1], c0)
        mult = np.arange(c0 + 1, c1 + 1)                        # k + 1 ...
        mult -= np.repeat(self.start[b0:b1], sizes)
        np.minimum(mult, np.repeat(self.move[b0:b1], sizes), out=mult)     # ... held at n_move
        if self.ramp is None:
            param = np.repeat(self.step[b0:b1], sizes)
            param *= mult
        else:
            param = ramp_distance(mult, *(np.repeat(a[b0:b1], sizes) for a in (
                self.step, self.move, *self.ramp)))
        param += np.repeat(self.base[b0:b1], sizes)
        # x + iy in one interpolation: one search of the axis for both (the same arithmetic
        # on each part as two real ones)
        z = np.interp(param, self.s, self.pz)
        x, y = z.real.copy(), z.imag.copy()
        i0, i1 = np.searchsorted(self.at, [c0, c1])
        if i1 > i0:
            j = self.at[i0:i1] - c0
            x[j] = self.blank_x[i0:i1]
            y[j] = self.blank_y[i0:i1]
        return x, y


def ramp_distance(j, step, move, v_in, v_out, r_in, r_out) -> np.ndarray:
    """Distance moved after j samples (1 .. move, elementwise) by a block that changes speed
    evenly from v_in to `step` over r_in samples, cruises at `step`, and changes evenly to
    v_out over its last r_out samples: a speed that changes by the same amount every sample,
    as an acceleration-limited move does. With r_in = r_out = 0 it is step * j.

    Examples
    --------
    >>> j = np.arange(1, 7)
    >>> ramp_distance(j, 2.0, 6, 0.0, 0.0, 2, 2).tolist()      # 6 samples, 8 units
    [0.5, 2.0, 4.0, 6.0, 7.5, 8.0]
    """
    j = np.asarray(j, dtype=float)
    r_in_s = np.maximum(r_in, 1)
    r_out_s = np.maximum(r_out, 1)
    d_in = (v_in + step) * r_in / 2.0                 # covered by the end of the first ramp
    tail = move - r_out                               # where the last ramp begins
    d_tail = d_in + step * (tail - r_in)
    q = j - tail
    return np.where(j <= r_in, v_in * j + (step - v_in) * j * j / (2.0 * r_in_s),
                    np.where(j <= tail, d_in + step * (j - r_in),
                             d_tail + step * q - (step - v_out) * q * q / (2.0 * r_out_s)))
