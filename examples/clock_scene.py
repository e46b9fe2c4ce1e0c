"""A wall clock for the tube.

    vectorgen play examples/clock_scene.py                     # live: hands follow the real time
    vectorgen render examples/clock_scene.py --seconds 10 -o clock.wav   # file: from START_TIME

Live, the scene time t is the time of day (LIVE_CLOCK), re-drawn once a second on the tick of
the wall clock. In a file, t starts at START_TIME and advances one second per second of the
file, so the same command always writes the same bytes.
"""

from vectorgen.scene import clock

UPDATE_HZ = 1.0
LIVE_CLOCK = True
START_TIME = "10:09:52"     # files show the seconds before 10:10
NUMERALS = False


def draw(t, screen):
    w, h = screen.half_extent
    # Numerals would add ~150 mm of strokes a frame and push the refresh below the flicker
    # threshold at the default writing speed; ticks and hands keep it above 40 Hz.
    return clock(screen, t, radius=0.9 * min(w, h), numerals=NUMERALS)
