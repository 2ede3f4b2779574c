"""The tracker on tones from an independent generator (SoX's synth effect, see tests/soxgen.py).

Outside reference: SoX 14.4 (src/synth.c) computes each sample's phase as freq * n / rate, so
the truth is exactly the frequency given to synth. Files are made at the file's own rate (every
harmonic above fs/2 folds back, as in an oscilloscope export of a logic-level oscillator) and
band-limited (synthesised at 64 times the rate, then SoX's own ``rate -v``): sine, triangle,
square, sawtooth, 10 % and 25 % pulse, four fundamentals spread log-uniformly over 300 Hz to
12 kHz, at 44.1, 48 and 96 kHz, 16 and 24 bit. Requirements (the brief of this feature): no frame
off the fundamental by more than 0.1 Hz without a flag that drops it; clean files within
0.5 mHz median, aliased ones within 2 mHz median where not flagged. A larger sweep is in
benchmarks/tracker_accuracy.py.
"""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf
from soxgen import WAVES, sox_available, synth

from coilshift.logger.runfolder import flags as fl
from coilshift.logger.tracking.tracker import track_array

pytestmark = pytest.mark.skipif(not sox_available(), reason="SoX is not installed (.ci/run installs it)")

#: log-uniform over 300 Hz .. 12 kHz; decimals keep every harmonic off the bin grid
FUNDAMENTALS_HZ = (301.37, 1234.56, 4321.09, 11987.6)
RATES_HZ = (44100, 48000, 96000)
SECONDS = 0.3  # 11 frames of 85 ms every 20 ms
ON_FUNDAMENTAL_HZ = 0.1


def _grid():
    for i, f0 in enumerate(FUNDAMENTALS_HZ):
        for j, rate in enumerate(RATES_HZ):
            yield f0, rate, (16, 24)[(i + j) % 2]  # both depths at every rate and fundamental


@pytest.fixture(scope="module")
def sox_dir(tmp_path_factory):
    return tmp_path_factory.mktemp("sox")


def _track(path):
    x, fs = sf.read(path)
    return track_array(x, fs)


@pytest.mark.slow
@pytest.mark.parametrize("band_limited", [True, False], ids=["band-limited", "aliased"])
@pytest.mark.parametrize("wave", list(WAVES))
def test_sox_tones(sox_dir, wave, band_limited):
    for f0, rate, bits in _grid():
        where = f"{wave} {f0} Hz at {rate} Hz, {bits} bit"
        tab = _track(synth(sox_dir, wave, f0, rate, bits, SECONDS, band_limited))
        err = np.abs(tab.freq_hz - f0)
        dropped = (tab.flags & fl.UNUSABLE) != 0
        # no silent wrong number: a frame off the fundamental (or without one) is dropped
        off = ~(err <= ON_FUNDAMENTAL_HZ)
        assert not np.any(off & ~dropped), f"{where}: unflagged frames at {tab.freq_hz[off & ~dropped]}"
        kept = err[~dropped]
        if band_limited or wave == "sine":
            # a clean tone: every frame usable, nothing flagged as folded
            assert not np.any(dropped), f"{where}: {sorted({fl.to_text(int(v)) for v in tab.flags})}"
            assert not np.any(tab.flags & fl.ALIASED), where
            assert np.median(kept) <= 0.5e-3, f"{where}: median error {np.median(kept) * 1e3:.3f} mHz"
        else:
            # harmonics fold back: every frame says so; where the folded lines let it be
            # measured, it is measured to 2 mHz
            assert np.all(tab.flags & fl.ALIASED), where
            if kept.size:
                assert np.median(kept) <= 2e-3, f"{where}: median error {np.median(kept) * 1e3:.3f} mHz"


@pytest.mark.parametrize(
    "args, f0, rate",
    [
        # a 10 % pulse whose sixth subharmonic has folded lines at its harmonics (was read as f0/6)
        (("square", "7512.25", "0", "0", "10"), 7512.25, 44100),
        # 3333.3 Hz at 48 kHz: folded lines on a 666.67 Hz grid (was read as f0/5)
        (("square", "3333.3"), 3333.3, 48000),
        # 2500 Hz at 44.1 kHz: 441 samples hold exactly 25 periods
        (("square", "2500"), 2500.0, 44100),
        # the 5th harmonic of 5 kHz folds onto 1 kHz, the 3rd onto 3 kHz: the sequence repeats every
        # 48 samples, yet the oscillator is the 5 kHz square
        (("square", "5000"), 5000.0, 48000),
    ],
)
def test_aliased_pulse_reported_at_its_fundamental(tmp_path, args, f0, rate):
    import subprocess
    if not sox_available():
        pytest.skip("SoX is not installed")
    path = tmp_path / "p.wav"
    subprocess.run(["sox", "-R", "-r", str(rate), "-n", "-b", "16", str(path), "synth", "1", *args, "vol", "0.5"],
                   check=True, capture_output=True)
    tab = _track(path)
    assert np.all(np.isfinite(tab.freq_hz))
    near = np.abs(tab.freq_hz - f0) <= ON_FUNDAMENTAL_HZ
    # every frame on the fundamental, or (a few mHz off) flagged alias_close; never a subharmonic
    assert np.all(near | ((tab.flags & fl.ALIAS_CLOSE) != 0))
    assert np.all(np.abs(tab.freq_hz - f0) < 1.0)
    assert np.all(tab.flags & fl.ALIASED)


@pytest.mark.parametrize("f0, rate", [(8000.0, 48000), (12000.0, 48000), (7350.0, 44100), (16000.0, 96000),
                                      (7999.5, 48000)])
def test_pure_sine_at_a_fraction_of_the_rate_is_not_flagged(tmp_path, f0, rate):
    # fs / f0 a whole number (or nearly): every folded place of a waveform's harmonics lies under
    # the tone or its harmonics, so folding cannot be seen; a pure sine (SoX's synth, outside
    # reference) shows no line but its own and must not lose its frames to alias_close
    if not sox_available():
        pytest.skip("SoX is not installed")
    tab = _track(synth(tmp_path, "sine", f0, rate, 16, 0.5, band_limited=False))
    assert not np.any(tab.flags), sorted({fl.to_text(int(v)) for v in tab.flags})
    assert np.all(np.abs(tab.freq_hz - f0) < 1e-3)  # 16-bit sine at -6 dBFS: CRB far below 1 mHz
