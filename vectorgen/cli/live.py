"""Commands `devices` and `play`: live output through an audio interface."""

from __future__ import annotations

import os
import sys
import time

from ..errors import DeviceError, VectorgenError
from .source_options import add_source_arguments
from .terminal import CAUTIONS, Stopper, fmt_duration, status_line, wait_interval


def cmd_devices(args) -> int:
    from ..live import output_devices

    devices = output_devices()
    if not devices:
        print("no output devices: PortAudio sees none (is the interface plugged in, or, for "
              "JACK, is the server running?)")
        return 0
    w = max(4, max(len(d.name) for d in devices))
    wa = max(8, max(len(d.hostapi) for d in devices))
    print(f"    {'#':>3}  {'name':<{w}}  {'host API':<{wa}}  {'out':>3}  default rate")
    for d in devices:
        mark = "*" if d.default else " "
        print(f"  {mark} {d.index:>3}  {d.name:<{w}}  {d.hostapi:<{wa}}  {d.channels:>3}  "
              f"{d.rate:g} Hz")
    print("* = the default output device; choose another with --device NUMBER or part of "
          "its name")
    return 0


def _check_seconds(seconds):
    from .render import _check_seconds as check

    check(seconds, 366 * 24 * 3600, "a year")


def cmd_play(args) -> int:
    from .. import live
    from .render import load_setup
    from .source_options import source_kind, static_strokes

    _check_seconds(args.seconds)
    kind = source_kind(args)
    live.sounddevice()                      # PortAudio present?
    profile, renderer = load_setup(args)
    scene = None
    if kind == "scene":
        from ..scene import load_scene, schedule_for

        scene = load_scene(args.source)
        animated = scene.update_hz > 0
    device = live.find_device(args.device)
    rate, channels = renderer.rate, renderer.channels
    live.check_device(device, channels, rate)

    if scene is None:
        frame = renderer.frame(static_strokes(args, profile))
        animated = False

    park, zmask = live.park_levels(profile.output, channels)
    stop_after = None if args.seconds is None else max(1, int(round(args.seconds * rate)))
    ramp_s = live.RAMP_MS * 1e-3
    if scene is not None:
        # The wall-clock time the first frame sample will be heard: after the start ramp (the
        # producer re-estimates it with the output latency once the stream runs).
        origin = time.time() + ramp_s
        schedule = schedule_for(scene, rate, live_origin=origin) if animated else None
        t0 = schedule.time(0) if schedule is not None else scene.start_time
        if scene.live_clock and not animated:
            from ..scene import time_of_day

            t0 = time_of_day(origin)
        frame = scene.frame(renderer, t0)
    from .render import warn_if_coarse

    warn_if_coarse(frame, profile)
    player = live.Player(frame.signal, rate, park, zmask, stop_after=stop_after)
    producer = None
    if animated:
        producer = live.Producer(player, scene_updates(scene, renderer, schedule, frame),
                                 schedule)
        producer.prime()
    return run_stream(player, producer, device, rate, channels, args.quiet)


def scene_updates(scene, renderer, schedule, first_frame):
    """render(k) for the producer: update k's loop and, when a stage plays something special
    on a frame switch, its first pass after update k - 1 (see `Renderer.first_pass`)."""
    made = {0: first_frame}

    def render(k):
        frame = scene.frame(renderer, schedule.time(k))
        prev = made.get(k - 1)
        made.clear()
        made[k] = frame
        first = renderer.first_pass(prev, frame) if prev is not None else None
        return frame.signal, first
    return render


STOP_GRACE_S = 2.0      # after a stop request, wait this long at most for the ramp to park
PAUSED_S = 0.5          # a wait loop step this much late: this process itself did not run
PARK_WAIT_S = 0.5       # after a stall, wait this long for the stop ramp before giving up


def run_stream(player, producer, device, rate: int, channels: int, quiet: bool) -> int:
    """Print the cautions, run the stream until it ends (--seconds, Ctrl-C, SIGTERM, SIGHUP,
    SIGQUIT or an error), park, print the summary line; raise the producer's or the
    callback's error as one line, and a dead or stalled stream as a `DeviceError` naming the
    device. Nothing here waits on the audio library without a bound (see `live.Player`)."""
    for line in CAUTIONS:
        print(f"vectorgen: {line}", file=sys.stderr)

    old_interval = sys.getswitchinterval()
    sys.setswitchinterval(0.0005)        # the audio callback needs the GIL promptly
    tty = sys.stdout.isatty() and not quiet
    started = time.monotonic()
    stop_asked = None
    failure = None
    try:
        with Stopper() as stopper:
            player.start(device.index, give_up=lambda: stopper.reason is not None)
            if producer is not None:
                producer.start()
            step = wait_interval(player_seconds(player))
            before = time.monotonic()
            while not player.wait(step):
                now = time.monotonic()
                if now - before > step + PAUSED_S:
                    player.excuse()
                before = now
                failure = player.check_alive()
                if failure is not None:
                    break
                if stopper.reason and stop_asked is None:
                    player.request_stop(stopper.reason)
                    stop_asked = now
                if stop_asked is not None and (stopper.urgent
                                               or now - stop_asked > STOP_GRACE_S):
                    break                    # the stream no longer runs its callback
                if tty:
                    sys.stdout.write("\r" + status_line(player, device,
                                                              time.monotonic() - started))
                    sys.stdout.flush()
            failure = failure or player.check_alive()
            if stopper.reason:
                player.request_stop(stopper.reason)
            if failure is not None:
                player.request_stop("device")
                if player.stream is not None and not stopper.urgent:
                    player.wait(PARK_WAIT_S)     # a stall may end: then the beam is parked
            _finish(player, producer)
    finally:
        _finish(player, producer)
        sys.setswitchinterval(old_interval)
    s = player.stats()
    if tty:
        sys.stdout.write("\r\033[K")
    why = {"Ctrl-C": "stopped by Ctrl-C", "SIGTERM": "stopped by SIGTERM",
           "SIGHUP": "stopped by SIGHUP", "SIGQUIT": "stopped by SIGQUIT",
           "error": "stopped by an error", "end": "end of --seconds",
           "device": "the audio output failed"}.get(player.stop_reason or "end", "stopped")
    parked = "parked" if failure is None or player.parked else "not parked"
    print(f"played {fmt_duration(s['seconds'])} on '{device.name}' ({device.hostapi}) at "
          f"{rate} Hz, {channels} channels: frames {s['frames']}, updates {s['updates']}, "
          f"late frames {s['late']}, underruns {s['underruns']}; {why}, {parked}")
    sys.stdout.flush()
    if os.environ.get("VECTORGEN_DEBUG") and player.underrun_at:
        print(f"underruns after samples {player.underrun_at}", file=sys.stderr)
    if failure is not None:
        beam = ("the beam was parked" if player.parked else
                "the beam could not be parked (turn the brightness down)")
        raise DeviceError(f"audio output on {device.describe()} failed after "
                          f"{fmt_duration(s['seconds'])} of frames: {failure}; {beam}")
    if producer is not None and producer.error is not None:
        exc = producer.error
        if isinstance(exc, VectorgenError):
            raise exc
        raise VectorgenError(f"while preparing frames: {type(exc).__name__}: {exc}")
    if player.callback_error is not None:
        exc = player.callback_error
        raise VectorgenError(f"audio callback failed: {type(exc).__name__}: {exc}")
    return 0


def _finish(player, producer) -> None:
    """Halt the producer (waiting a second at most: it may be inside a slow scene) and close
    the stream (bounded, see `Player.close`)."""
    if producer is not None and producer.ident is not None:     # it was started
        producer.halt()
        producer.join(timeout=1.0)
    player.close()


def player_seconds(player) -> float | None:
    return None if player.stop_after is None else player.stop_after / player.rate


def play_frame(frame, profile, device_spec, seconds: float | None, quiet: bool) -> int:
    """Play one rendered frame in a loop on the device given by --device (a static drawing,
    a calibration pattern)."""
    from .. import live

    _check_seconds(seconds)
    device = live.find_device(device_spec)
    channels = frame.signal.shape[1]
    live.check_device(device, channels, frame.rate)
    park, zmask = live.park_levels(profile.output, channels)
    stop_after = None if seconds is None else max(1, int(round(seconds * frame.rate)))
    player = live.Player(frame.signal, frame.rate, park, zmask, stop_after=stop_after)
    return run_stream(player, None, device, frame.rate, channels, quiet)


def register(sub) -> None:
    p = sub.add_parser("devices", help="list the audio output devices",
                       description="List the output devices PortAudio sees: number, name, host "
                       "API, output channels and default sample rate; * marks the default.")
    p.set_defaults(func=cmd_devices)

    from .render import add_output_arguments

    p = sub.add_parser("play", help="play a source live through an audio interface",
                       description="Play a drawing or a scene script (.py) live through an audio "
                       "interface, looping each frame seamlessly, until Ctrl-C or --seconds. "
                       "A scene is re-drawn at its UPDATE_HZ; new frames start only at frame "
                       "boundaries. On stop the beam ramps to the centre, blanked where there "
                       "is a Z channel.")
    add_source_arguments(p)
    add_output_arguments(p)
    p.add_argument("--device", metavar="NUMBER|NAME",
                   help="output device: its number or a case-insensitive part of its name "
                        "(see 'vectorgen devices'; default: the system's default output)")
    p.add_argument("--seconds", type=float, default=None,
                   help="stop after this long (default: until Ctrl-C)")
    p.add_argument("-q", "--quiet", action="store_true", help="no live status line")
    p.set_defaults(func=cmd_play)


__all__ = ["register", "cmd_play", "cmd_devices"]
