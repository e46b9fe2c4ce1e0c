"""Helpers shared by the render-path tests (not a test module itself).

Everything here is plumbing: writing small SVG files, running the command line in a child
process, rendering through the Python API and pulling lit runs out of a beam plan. The checks
themselves, and the outside references they are made against, live in the test modules.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np

from vectorgen.profile import Profile, profile_from_dict
from vectorgen.pipeline import Renderer, Settings
from vectorgen.strokes import strokes_from_polylines

SVG_NS = "http://www.w3.org/2000/svg"
REPO = Path(__file__).resolve().parent.parent


def svg_text(body: str, attrs: str = 'viewBox="0 0 100 80"', xmlns: bool = True) -> str:
    ns = f' xmlns="{SVG_NS}"' if xmlns else ""
    return f'<?xml version="1.0" encoding="UTF-8"?>\n<svg{ns} {attrs}>\n{body}\n</svg>\n'


def write_svg(folder, body: str, name: str = "drawing.svg", **kw) -> str:
    path = Path(folder) / name
    path.write_text(svg_text(body, **kw), encoding="utf-8")
    return str(path)


def run_cli(*args, cwd=None, timeout: float = 120) -> subprocess.CompletedProcess:
    """`python -m vectorgen ARGS...` in a child process (text output captured)."""
    env = dict(os.environ)
    env.pop("VECTORGEN_DEBUG", None)
    env["PYTHONPATH"] = str(REPO) + os.pathsep + env.get("PYTHONPATH", "")
    return subprocess.run([sys.executable, "-m", "vectorgen", *map(str, args)], cwd=cwd,
                          capture_output=True, text=True, timeout=timeout, env=env)


def make_profile(**sections) -> Profile:
    """A validated profile from TOML-like tables, e.g. make_profile(output={"channels": 3})."""
    return profile_from_dict(sections, source="<test>")


def render(strokes, profile: Profile | None = None, **settings):
    """One frame through the real engine (Renderer.frame)."""
    profile = profile if profile is not None else Profile()
    return Renderer(profile, Settings(**settings)).frame(strokes)


def polylines(*lines, intensity=1.0, labels=None):
    return strokes_from_polylines([np.asarray(p, dtype=float) for p in lines], intensity, labels)


def lit_runs(plan) -> list[np.ndarray]:
    """Sample indices of each maximal run of lit samples belonging to one stroke."""
    idx = np.flatnonzero(plan.lit)
    if not idx.size:
        return []
    brk = np.flatnonzero((np.diff(idx) != 1) | (np.diff(plan.stroke[idx]) != 0)) + 1
    return np.split(idx, brk)


def blank_runs(lit: np.ndarray) -> list[np.ndarray]:
    """Sample indices of each maximal run of blanked samples (a run may wrap the frame end)."""
    idx = np.flatnonzero(~np.asarray(lit))
    if not idx.size:
        return []
    runs = np.split(idx, np.flatnonzero(np.diff(idx) != 1) + 1)
    n = len(lit)
    if len(runs) > 1 and runs[0][0] == 0 and runs[-1][-1] == n - 1:
        runs = [np.concatenate([runs[-1], runs[0]])] + runs[1:-1]
    return runs


def moving_steps(points: np.ndarray) -> np.ndarray:
    """Distances between consecutive samples, dwells (zero steps) left out."""
    d = np.hypot(*np.diff(points, axis=0).T)
    return d[d > 1e-12]


def files_in(folder) -> set[str]:
    return {p.name for p in Path(folder).iterdir()}


def resvg_alpha(svg: str, width_px: int) -> np.ndarray:
    """resvg's picture of an SVG (resvg_py, an independent renderer) as coverage 0..1: the
    alpha channel of its PNG, `width_px` pixels across the page. (dpi=96 has to be given: with
    the binding's default of 0, a page sized in mm comes out with no size and is refused.)"""
    import io

    import resvg_py
    from PIL import Image

    png = resvg_py.svg_to_bytes(svg_string=svg, width=int(width_px), dpi=96.0)
    return np.asarray(Image.open(io.BytesIO(png)).convert("RGBA"))[:, :, 3] / 255.0


def lit_path_points(plan, step_mm: float = 0.05) -> np.ndarray:
    """The spot's lit path: every lit run of a beam plan, the straight moves between its
    samples filled in every `step_mm` (a lone lit sample stays one point)."""
    out = []
    for run in lit_runs(plan):
        p = plan.points[run]
        if len(p) == 1:
            out.append(p)
            continue
        t = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(p, axis=0).T))])
        u = np.linspace(0.0, t[-1], max(2, int(np.ceil(t[-1] / step_mm)) + 1))
        out.append(np.column_stack([np.interp(u, t, p[:, 0]), np.interp(u, t, p[:, 1])]))
    return np.concatenate(out) if out else np.zeros((0, 2))
