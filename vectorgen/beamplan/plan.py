"""The beam plan of one frame: where the spot is at every sample, and whether it is lit."""

from __future__ import annotations

from functools import cached_property

import numpy as np

from ..strokes import Strokes
from .layout import Layout

__all__ = ["Plan"]


class Plan:
    """Where the spot is at every sample of one frame, and whether it is lit.

    The frame is a run of lit samples per stroke (in drawing order), each followed by the run
    of blanked samples that jumps to the next stroke. `lit` is stored per sample; the spot
    position of any span of samples is worked out from the frame's layout on demand
    (`positions`), so the signal path goes through the frame in cache-sized chunks and never
    holds it whole. `x`, `y`, `points`, `intensity`, `stroke` and the reordered `strokes` are
    made when first asked for, and kept."""

    def __init__(self, layout: Layout, lit: np.ndarray, runs: np.ndarray, strokes,
                 stroke_intensity: np.ndarray, drawn_length_mm: float, moving_samples: int,
                 blanked_moves: int, blanked_length_mm: float, corners: int,
                 jump_samples: int = 0):
        self._layout = layout
        self.lit = lit              # (n,) bool: beam on
        self.runs = runs            # (2 S,) samples lit on stroke i, then blanked, in turn
        self.stroke_intensity = stroke_intensity    # (S,) of the strokes in the order drawn
        self.drawn_length_mm = drawn_length_mm
        self.moving_samples = moving_samples    # lit samples that advance along a stroke
        self.blanked_moves = blanked_moves
        self.blanked_length_mm = blanked_length_mm
        self.corners = corners
        self.jump_samples = jump_samples      # samples the blanked moves take (not settles)
        # the strokes in the order drawn, or a function that makes them
        self._strokes = strokes

    def positions(self, start: int, stop: int) -> tuple[np.ndarray, np.ndarray]:
        """Spot x and y in mm of samples start .. stop - 1."""
        if "_xy" in self.__dict__:               # the whole frame was already worked out
            return self._xy[0][start:stop], self._xy[1][start:stop]
        return self._layout.positions(start, stop)

    @cached_property
    def _xy(self) -> tuple[np.ndarray, np.ndarray]:
        return self._layout.positions(0, self.samples)

    @property
    def x(self) -> np.ndarray:
        """(n,) spot x in mm at every sample."""
        return self._xy[0]

    @property
    def y(self) -> np.ndarray:
        """(n,) spot y in mm at every sample."""
        return self._xy[1]

    @property
    def samples(self) -> int:
        return len(self.lit)

    @property
    def stroke_count(self) -> int:
        return len(self.stroke_intensity)

    @property
    def strokes(self) -> Strokes:
        """The strokes in the order drawn (reversed ones flipped)."""
        if callable(self._strokes):
            self._strokes = self._strokes()
        return self._strokes

    @cached_property
    def points(self) -> np.ndarray:
        """(n, 2) spot position in mm at every sample."""
        return np.column_stack([self.x, self.y])

    @cached_property
    def intensity(self) -> np.ndarray:
        """(n,) brightness 0..1 (0 where blanked)."""
        S = self.stroke_count
        return np.repeat(np.column_stack([self.stroke_intensity, np.zeros(S)]).ravel(), self.runs)

    @cached_property
    def stroke(self) -> np.ndarray:
        """(n,) index into `strokes` of each lit sample, -1 when blanked."""
        S = self.stroke_count
        return np.repeat(np.column_stack([np.arange(S), np.full(S, -1)]).ravel(), self.runs)

    def with_tail(self, points_mm: np.ndarray, moves: int = 0, length_mm: float = 0.0) -> "Plan":
        """A copy with blanked samples at these positions ((E, 2) mm) added at the end of the
        frame (after the jump back to the first stroke): a balancing excursion. `moves` and
        `length_mm` are its blanked moves and their length, for the report."""
        E = len(points_mm)
        if E == 0:
            return self
        lay = self._layout
        n = self.samples
        end = lay.end.copy()
        end[-1] += E
        layout = Layout(lay.s, lay.px, lay.py, lay.pz, lay.start, end, lay.move, lay.step,
                        lay.base, np.concatenate([lay.at, np.arange(n, n + E)]),
                        np.concatenate([lay.blank_x, points_mm[:, 0]]),
                        np.concatenate([lay.blank_y, points_mm[:, 1]]), lay.ramp)
        runs = self.runs.copy()
        runs[-1] += E
        return Plan(layout, np.concatenate([self.lit, np.zeros(E, dtype=bool)]), runs,
                    self._strokes, self.stroke_intensity, self.drawn_length_mm,
                    self.moving_samples, self.blanked_moves + moves,
                    self.blanked_length_mm + length_mm, self.corners, self.jump_samples)
