"""Shared fixtures. `jack_server`: one real JACK server (dummy backend, 48 kHz, no audio
hardware) for the whole run, under a name unique to this run. Without jackd the tests that
need it are skipped, except under CI (CI set in the environment), where that is a failure."""

from __future__ import annotations

import os

import pytest

from jack_helpers import JACKD, JackServer

# the command line registers the built-in shapes and stroke font when it reads a source; the
# library-level tests (scenes that call clock() or text()) register them here, as a library
# user would
import shapes  # noqa: E402,F401


@pytest.fixture(scope="session")
def jack_server():
    if JACKD is None:
        if os.environ.get("CI"):
            pytest.fail("jackd is not installed, but CI must run the live-output tests: "
                        "install jackd2 (apt-get install -y --no-install-recommends jackd2)")
        pytest.skip("jackd is not installed (apt-get install jackd2): live-output tests "
                    "need a JACK server")
    # A period of 2048 frames (43 ms) rides out the scheduling stalls of a shared virtual
    # machine: at 512 frames (10.7 ms) about one run in eight saw a JACK xrun, in the player
    # and in this process's recorder alike, even for a client that does nothing.
    server = JackServer(rate=48000, period=2048, playback=4).start()
    yield server
    server.stop()
