"""Dwell rules: how long the spot holds still at stroke ends, sharp corners and dots.

* An open stroke dwells `end_dwell` samples at its start and at its end, so its ends come out as
  bright as its middle and square.
* A sharp corner (a turn sharper than `corner_angle_deg`) dwells `corner_dwell` samples.
* A closed stroke has no free ends: its start is lit once, and it dwells again at the end only
  when the closure itself is a sharp corner (a rectangle's corner).
* A dot (a one-point stroke) dwells `dot_dwell` samples.
"""

from __future__ import annotations

import numpy as np

__all__ = ["turn_deg", "dwells"]


def turn_deg(d_in: np.ndarray, d_out: np.ndarray) -> np.ndarray:
    """Turning angle in degrees between incoming and outgoing direction vectors (m, 2).

    Examples
    --------
    >>> turn_deg(np.array([[1.0, 0.0]]), np.array([[0.0, 1.0]])).round(6).tolist()
    [90.0]
    """
    cosang = np.einsum("ij,ij->i", d_in, d_out) / (np.hypot(*d_in.T) * np.hypot(*d_out.T))
    return np.degrees(np.arccos(np.clip(cosang, -1.0, 1.0)))


def dwells(px, py, first, last, lengths, piece_stroke, piece_last, timing, piece_end=None,
           settle=None):
    """Dwell samples of a frame's strokes.

    `settle`, for a lagging deflection drawn without compensation: ``settle(turn_deg) ->
    samples`` the spot needs to follow a turn to within its size; each sharp corner (at the
    vertices `piece_end` of the pieces that are not a stroke's last) and each open stroke's
    end (the spot stops: as a turn of 60 degrees, whose change of velocity is the speed)
    then dwells at least that long, so the dwell grows with the turn.

    Returns
    -------
    start_rep : (S,) int
        Dwell at each stroke's start (a dot's whole dwell).
    piece_rep : (P,) int
        Dwell at the end of each piece: a corner dwell, or the stroke's end dwell.
    closed_sharp : (S,) bool
        Closed strokes whose closure is a sharp corner.
    """
    def at(i):
        return np.column_stack([px[i], py[i]])

    S = len(first)
    is_dot = lengths == 0
    closed = ~is_dot & (px[first] == px[last]) & (py[first] == py[last])
    closed_sharp = np.zeros(S, dtype=bool)
    cs = np.flatnonzero(closed & (last - first >= 2))
    if cs.size:
        closed_sharp[cs] = turn_deg(at(last[cs]) - at(last[cs] - 1),
                                    at(first[cs] + 1) - at(first[cs])) > timing.corner_angle_deg
    end_rep = np.where(closed, np.where(closed_sharp, timing.corner_dwell, 0), timing.end_dwell)
    piece_rep = np.where(piece_last, end_rep[piece_stroke], timing.corner_dwell)
    if settle is not None and len(piece_rep):
        b = np.asarray(piece_end)
        corner = np.flatnonzero(~piece_last)
        if corner.size:
            turn = turn_deg(at(b[corner]) - at(b[corner] - 1), at(b[corner] + 1) - at(b[corner]))
            piece_rep[corner] = np.maximum(piece_rep[corner], settle(turn))
        stop = np.flatnonzero(piece_last & ~closed[piece_stroke])
        piece_rep[stop] = np.maximum(piece_rep[stop], settle(np.full(len(stop), 60.0)))
    start_rep = np.where(is_dot, timing.dot_dwell, np.where(closed, 1, timing.end_dwell))
    return start_rep.astype(np.int64), piece_rep.astype(np.int64), closed_sharp
