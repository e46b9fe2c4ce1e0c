"""Soak benchmark of live output (not part of the test suite).

`soak(seconds=60, rate=96000, update_ms=20)` starts its own JACK server on the dummy backend,
plays the spinning-cube scene through PortAudio's JACK host API with a new frame every
`update_ms`, and prints underruns (PortAudio's output_underflow flags), JACK xruns (from a
watching client), late frames and the growth of the process's resident memory after warm-up.
Targets: zero underruns, zero xruns, zero late frames, flat memory.

Run it alone:  python tests/bench_live.py [--seconds 60] [--rate 96000] [--update-ms 20]
With VG_SOAK_TRACE=1 it also lists where Python memory grew after warm-up (tracemalloc).
"""

from __future__ import annotations

import argparse
import math
import os
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
if str(HERE) not in sys.path:
    sys.path.insert(0, str(HERE))
if str(HERE.parent) not in sys.path:
    sys.path.insert(0, str(HERE.parent))

from jack_helpers import JACKD, JackServer  # noqa: E402

import shapes  # noqa: E402,F401  (registers the built-in shapes the scenes use)

CUBE = HERE.parent / "examples" / "spinning_cube.py"


def rss_mb() -> float:
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE") / 2 ** 20


def soak(seconds: float = 60.0, rate: int = 96000, update_ms: float = 20.0,
         period: int | None = None, channels: int = 3, refresh_hz: float = 100.0) -> dict:
    """Play `seconds` of the cube scene live at `rate` with an update every `update_ms`.
    Frames are fitted to `refresh_hz` (10 ms at the default), so each update is shown for two
    whole frames. `period` is the JACK period in frames (default: about 43 ms)."""
    if JACKD is None:
        print("bench_live: jackd is not installed (apt-get install jackd2); soak skipped")
        return {}
    period = period or max(256, int(2 ** round(math.log2(rate * 0.0427))))
    server = JackServer(rate=rate, period=period, name=f"vgsoak{os.getpid()}").start()
    server.use_in_this_process()
    sd = None
    trace = bool(os.environ.get("VG_SOAK_TRACE"))
    if trace:
        import tracemalloc

        tracemalloc.start()
    try:
        import jack

        from vectorgen import live
        from vectorgen.profile import Profile
        from vectorgen.pipeline import Renderer, Settings
        from vectorgen.scene import FixedSchedule, load_scene

        sd = live.sounddevice()
        scene = load_scene(str(CUBE))
        hz = 1000.0 / update_ms
        profile = Profile()
        renderer = Renderer(profile, Settings(rate=rate, channels=channels, refresh=refresh_hz))
        sched = FixedSchedule(rate, hz)
        first = scene.frame(renderer, sched.time(0))
        park, zmask = live.park_levels(profile.output, channels)
        player = live.Player(first.signal, rate, park, zmask,
                             stop_after=int(round(seconds * rate)))
        render_ms = [0.0, 0.0, 0]          # sum, max, count (no list that grows)

        def render(k):
            t0 = time.perf_counter()
            sig = scene.frame(renderer, sched.time(k)).signal
            ms = (time.perf_counter() - t0) * 1e3
            render_ms[0] += ms
            render_ms[1] = max(render_ms[1], ms)
            render_ms[2] += 1
            return sig, None

        producer = live.Producer(player, render, sched)
        producer.prime()            # as `vectorgen play` does: updates due at once made first
        watcher = jack.Client("vgsoakwatch", servername=server.name, no_start_server=True)
        xruns = []
        watcher.set_xrun_callback(lambda delay: xruns.append(delay))
        watcher.activate()
        device = live.find_device("system")
        old = sys.getswitchinterval()
        sys.setswitchinterval(0.0005)
        memory = [(0.0, 0.0)] * int(seconds + 30)
        n_mem = 0
        t_start = time.monotonic()
        try:
            player.start(device.index)
            producer.start()
            snap = None
            while not player.wait(1.0):
                if trace and snap is None and time.monotonic() - t_start > min(10.0, seconds / 3):
                    snap = tracemalloc.take_snapshot()
                if n_mem < len(memory):
                    memory[n_mem] = (time.monotonic() - t_start, rss_mb())
                    n_mem += 1
        finally:
            producer.halt()
            producer.join(5)
            player.close()
            sys.setswitchinterval(old)
            watcher.deactivate()
            watcher.close()
        wall = time.monotonic() - t_start
        if trace and snap is not None:
            top = tracemalloc.take_snapshot().compare_to(snap, "lineno")[:5]
            print("tracemalloc growth after warm-up, largest first:")
            for stat in top:
                print(f"  {stat}")
        warm = [m for t, m in memory[:n_mem] if t >= min(10.0, seconds / 3)]
        growth = (warm[-1] - warm[0]) if len(warm) >= 2 else 0.0
        s = player.stats()
        result = {
            "seconds_played": s["seconds"], "wall_s": wall, "rate": rate, "period": period,
            "update_ms": update_ms, "frame_samples": first.samples, "frames": s["frames"],
            "updates_shown": s["updates"], "rendered": producer.rendered,
            "late_frames": s["late"], "superseded": s["superseded"],
            "underruns": s["underruns"], "jack_xruns": len(xruns),
            "rss_start_mb": warm[0] if warm else rss_mb(), "rss_growth_mb": growth,
            "render_ms_mean": render_ms[0] / max(1, render_ms[2]),
            "render_ms_max": render_ms[1],
        }
        print(f"live soak: {result['seconds_played']:.1f} s at {rate} Hz (JACK dummy, period "
              f"{period}), {channels} channels, update every {update_ms:g} ms, frame "
              f"{first.samples} samples: underruns {result['underruns']}, JACK xruns "
              f"{result['jack_xruns']}, late frames {result['late_frames']}, updates shown "
              f"{result['updates_shown']} of {producer.rendered} rendered, render "
              f"{result['render_ms_mean']:.2f} ms mean / {result['render_ms_max']:.2f} ms max, "
              f"memory {result['rss_start_mb']:.1f} MB after warm-up, growth "
              f"{growth:+.2f} MB (targets: 0, 0, 0, flat)")
        return result
    finally:
        if sd is not None:
            sd._terminate()          # PortAudio lets go of the server before it stops
        server.stop()


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description="soak test of live output through JACK's dummy "
                                 "backend")
    ap.add_argument("--seconds", type=float, default=60.0)
    ap.add_argument("--rate", type=int, default=96000)
    ap.add_argument("--update-ms", type=float, default=20.0)
    ap.add_argument("--period", type=int, default=None, help="JACK period in frames")
    a = ap.parse_args(argv)
    soak(a.seconds, a.rate, a.update_ms, a.period)
    return 0


if __name__ == "__main__":
    sys.exit(main())
