"""The live player's sample engine (Player._fill), driven block by block without an audio
device: frame switches at boundaries, repeats when late, counting, start and stop ramps.
The audio path itself (PortAudio through a real JACK server) is in test_live_jack.py."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.signal.windows import hann

from vectorgen.errors import VectorgenError
from vectorgen.live import Player, park_levels, ramp, ramp_weights
from vectorgen.profile import Output
from vectorgen.channels import ChannelMap

RATE = 48000


def distinct_frame(k: int, n: int, ch: int = 2) -> np.ndarray:
    """A frame whose every sample says which frame (k) and which sample (i) it is."""
    i = np.arange(n, dtype=np.float32)
    f = np.empty((n, ch), dtype=np.float32)
    f[:, 0] = (k + 1) / 64.0
    f[:, 1] = i / 4096.0
    if ch > 2:
        f[:, 2:] = 0.5
    return f


def run(player: Player, blocks, limit: int = 10_000) -> np.ndarray:
    """Call the engine with the given block sizes (cycled) until it reports finished."""
    out = []
    for j in range(limit):
        n = blocks[j % len(blocks)]
        buf = np.full((n, player.channels), np.nan, dtype=np.float32)
        done = player._fill(buf, n)
        out.append(buf)
        if done:
            return np.concatenate(out)
    raise AssertionError("the player never finished")


def expected_frames(frames, dues, stop_after):
    """Independent sample-by-sample statement of the rule: play the current frame to its end;
    at each boundary P take the latest frame whose due sample is <= P."""
    out, P, cur = [], 0, 0
    while P < stop_after:
        for s in frames[cur]:
            if P == stop_after:
                break
            out.append(s)
            P += 1
        else:
            due_now = [k for k in range(len(frames)) if dues[k] <= P]
            cur = max(due_now)
    return np.array(out, dtype=np.float32)


@settings(max_examples=60, deadline=None)
@given(lengths=st.lists(st.integers(1, 300), min_size=1, max_size=8),
       gaps=st.lists(st.integers(0, 900), min_size=8, max_size=8),
       blocks=st.lists(st.integers(1, 700), min_size=1, max_size=5),
       stop_after=st.integers(1, 4000))
def test_frames_switch_only_at_boundaries(lengths, gaps, blocks, stop_after):
    frames = [distinct_frame(k, n) for k, n in enumerate(lengths)]
    dues = [0] + list(np.cumsum(gaps[:len(frames) - 1]))
    park, zmask = np.zeros(2, np.float32), np.zeros(2, bool)
    p = Player(frames[0], RATE, park, zmask, stop_after=stop_after)
    for k in range(1, len(frames)):
        p.submit(dues[k], frames[k], k)
    out = run(p, blocks)
    r, h = p.ramp_samples, p.hold_samples
    want = expected_frames(frames, dues, stop_after)
    assert not np.isnan(out).any()
    assert len(out) >= r + stop_after + r + h
    np.testing.assert_array_equal(out[r:r + stop_after], want)
    # Every frame that started was played from its first sample: a switch never lands
    # inside a frame (each run of one frame's samples starts at sample index 0).
    body = out[r:r + stop_after]
    starts = np.flatnonzero(np.diff(body[:, 0]) != 0) + 1
    assert np.all(body[starts, 1] == 0.0)
    assert p.position == stop_after
    assert p.late == 0
    # after the stop ramp the output rests at the park position
    np.testing.assert_array_equal(out[r + stop_after + r:], 0.0)


def test_late_frame_repeats_the_current_one_and_is_counted_once():
    a, b = distinct_frame(0, 100), distinct_frame(1, 70)
    p = Player(a, RATE, np.zeros(2, np.float32), np.zeros(2, bool), stop_after=1000)
    p.awaiting = 150                       # the producer is still making the update due at 150
    out = np.zeros((p.ramp_samples + 480, 2), np.float32)
    p._fill(out, len(out))                 # boundaries at 100, 200, 300, 400
    assert p.late == 1                     # counted at boundary 200, not again at 300 or 400
    body = out[p.ramp_samples:]
    np.testing.assert_array_equal(body[:400], np.tile(a, (4, 1)))
    p.submit(150, b, 1)                    # arrives late: taken at the next boundary (500)
    more = np.zeros((200, 2), np.float32)
    p._fill(more, 200)
    np.testing.assert_array_equal(more[:20], a[80:])
    np.testing.assert_array_equal(more[20:90], b)
    assert p.late == 1 and p.switches == 1 and p.shown == 1


def test_superseded_frames_are_passed_over():
    frames = [distinct_frame(k, 50) for k in range(4)]
    p = Player(frames[0], RATE, np.zeros(2, np.float32), np.zeros(2, bool), stop_after=200)
    for k, due in ((1, 10), (2, 20), (3, 60)):
        p.submit(due, frames[k], k)
    out = run(p, [64])[p.ramp_samples:p.ramp_samples + 200]
    # boundary 50: frames 1 and 2 are due -> 2 (1 superseded); boundary 100: 3 is due
    np.testing.assert_array_equal(out, np.concatenate([frames[0], frames[2], frames[3],
                                                       frames[3]]))
    assert p.superseded == 1 and p.late == 0


def test_ramp_is_the_rising_half_of_a_hann_window():
    n = 240
    # scipy's symmetric Hann window of length 2n + 1: w[k] = (1 - cos(pi k / n)) / 2
    np.testing.assert_allclose(ramp_weights(n), hann(2 * n + 1, sym=True)[1:n + 1], atol=1e-15)
    start = np.array([0.8, -0.6, 1.0])
    r = ramp(start, np.zeros(3), n, np.array([False, False, True]), np.zeros(3))
    assert r.dtype == np.float32 and r.shape == (n, 3)
    np.testing.assert_array_equal(r[-1], 0.0)
    np.testing.assert_array_equal(r[:, 2], 0.0)          # Z blanked for the whole ramp
    # the steepest step of a raised cosine over n samples is |b - a| sin(pi / (2n)) at most
    # (textbook: d/di (1 - cos(pi i / n)) / 2 = pi / (2n) sin(pi i / n))
    steps = np.abs(np.diff(np.vstack([start[None, :2], r[:, :2]]), axis=0))
    assert np.all(steps <= np.abs(start[:2]) * np.pi / (2 * n) + 1e-7)


def test_stop_ramps_from_where_the_beam_is_to_park():
    a = distinct_frame(0, 400, ch=3)
    park, zmask = np.array([0.0, 0.0, -0.25], np.float32), np.array([False, False, True])
    p = Player(a, RATE, park, zmask)
    r = p.ramp_samples
    first = np.zeros((r + 123, 3), np.float32)
    p._fill(first, len(first))
    last = first[-1].copy()
    p.request_stop("Ctrl-C")
    out = run(p, [512])
    w = (1 - np.cos(np.pi * np.arange(1, r + 1) / r)) / 2
    np.testing.assert_allclose(out[:r, :2], last[:2] + (park[:2] - last[:2]) * w[:, None],
                               atol=1e-7)
    np.testing.assert_array_equal(out[:r, 2], -0.25)      # blank level from the first sample
    np.testing.assert_array_equal(out[r:], np.tile(park, (len(out) - r, 1)))
    assert p.stop_reason == "Ctrl-C"
    # the start ramp, too, went from park to the first sample with Z blanked
    np.testing.assert_allclose(first[r - 1, :2], a[0, :2], atol=1e-7)
    np.testing.assert_array_equal(first[:r, 2], -0.25)


def test_park_is_the_centre_blanked_in_the_profiles_channel_mapping():
    out = Output(channels=3, order=["y", "z", "x"], invert=["x"], z_polarity="negative",
                 z_blank_level=0.2)
    park, zmask = park_levels(out, 3)
    assert zmask.tolist() == [False, True, False]
    drive, z = ChannelMap(out, 3).from_channels(park[None, :])     # undo the mapping
    np.testing.assert_array_equal(drive, [[0.0, 0.0]])
    assert z[0] == 0.0                                    # at the blank level: beam off
    assert park[1] == pytest.approx(-0.2)


def test_frames_of_the_wrong_shape_are_refused():
    p = Player(distinct_frame(0, 10), RATE, np.zeros(2, np.float32), np.zeros(2, bool))
    with pytest.raises(VectorgenError, match="shape"):
        p.submit(5, np.zeros((10, 3), np.float32), 1)
    with pytest.raises(VectorgenError, match="empty"):
        Player(np.zeros((0, 2), np.float32), RATE, np.zeros(2), np.zeros(2, bool))


def test_priming_makes_the_first_updates_before_the_stream_starts():
    from vectorgen.live import Producer
    from vectorgen.scene import FixedSchedule

    made = []

    def render(k):
        made.append(k)
        return distinct_frame(k, 300), None

    p = Player(distinct_frame(0, 300), RATE, np.zeros(2, np.float32), np.zeros(2, bool),
               stop_after=RATE)
    prod = Producer(p, render, FixedSchedule(RATE, 50.0))
    prod.prime(0.25)
    # updates every 20 ms: 1..12 are due within 0.25 s (12 * 960 = 11520 <= 12000 samples)
    assert made == list(range(1, 13))
    assert [f.due for f in p.pending] == [960 * k for k in range(1, 13)]
    out = run(p, [512])[p.ramp_samples:p.ramp_samples + 12000]
    # played with no producer thread at all: each primed update appears at its boundary
    firsts = out[np.flatnonzero(np.diff(out[:, 0]) != 0) + 1, 0]
    assert np.round(firsts * 64 - 1).astype(int).tolist() == list(range(1, 13))
    assert p.late == 0
