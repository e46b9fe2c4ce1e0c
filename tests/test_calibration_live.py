"""A calibration pattern shown live (`vectorgen pattern box --play`) through a real JACK dummy
server, recorded sample for sample: the stream is exactly the frame `pattern -o` writes to a
file, and the measurement sheet is written before the stream starts."""

from __future__ import annotations

import csv

import numpy as np
from scipy.io import wavfile

from jack_helpers import find_frame, play_and_record, summary_counts
from render_helpers import run_cli


def test_pattern_plays_live_the_frame_it_writes(jack_server, tmp_path):
    ref, ref_sheet = tmp_path / "box.wav", tmp_path / "ref.csv"
    r = run_cli("pattern", "box", "-o", ref, "--sheet", ref_sheet, "--channels", 3)
    assert r.returncode == 0, r.stderr
    rate, frame = wavfile.read(ref)       # scipy's WAV reader: an independent reader
    assert rate == 48000

    sheet = tmp_path / "live.csv"
    seconds = 1.5
    r = play_and_record(jack_server, ["box", "--play", "--sheet", sheet, "--channels", 3,
                                      "--seconds", seconds], 3, seconds,
                        command=("pattern",))
    assert r.returncode == 0, r.stderr
    assert r.connected
    assert summary_counts(r.stdout).get("underruns") == 0
    assert r.xruns == 0
    assert "caution: lethal high voltage" in r.stderr

    i = find_frame(r.capture, frame)
    assert i >= 0, "no full copy of the pattern's frame in the recording"
    L = len(frame)
    loops = 0
    while i + (loops + 1) * L <= len(r.capture) and np.array_equal(
            r.capture[i + loops * L:i + (loops + 1) * L], frame):
        loops += 1
    assert loops >= 0.5 * seconds * rate / L      # most of the run, in whole exact frames

    with open(sheet, newline="") as fh:
        live_rows = list(csv.reader(fh))
    with open(ref_sheet, newline="") as fh:
        assert live_rows == list(csv.reader(fh))
    assert live_rows[0] == ["point", "drive_x", "drive_y", "measured_x_mm", "measured_y_mm"]


def test_pattern_needs_a_file_or_play(tmp_path):
    r = run_cli("pattern", "box", "--sheet", tmp_path / "s.csv")
    assert r.returncode == 2
    assert len(r.stderr.strip().splitlines()) == 1 and "--play" in r.stderr
    assert not (tmp_path / "s.csv").exists()
