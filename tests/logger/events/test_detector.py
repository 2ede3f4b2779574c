"""The streaming detector: block-size independence, learning the noise live, long events."""

import numpy as np
import pytest

from coilshift.logger.events.detector import DetectorSettings, PassDetector, run_lengths
from coilshift.logger.events.statistic import NoiseLevel
from coilshift.logger.events.variogram import Variogram, lag_set


def _session(seed=4, n=15000, hop=0.02):
    rng = np.random.default_rng(seed)
    t = (np.arange(n) + 0.5) * hop
    y = 20000.0 + 0.005 * rng.standard_normal(n) + 0.1 / 60 * t
    truth = [(80.0, 0.2), (120.0, -0.08), (200.0, 0.05), (260.0, -0.3)]
    for t0, a in truth:
        y += a * np.exp(-0.5 * ((t - t0) / 0.4) ** 2)
    return t, y, truth


def _run(det, t, y, block):
    out = []
    for i in range(0, t.size, block):
        out += det.push(t[i:i + block], y[i:i + block])
    return out + det.flush()


def _given(t, y):
    ok = np.ones(t.size, bool)
    vg = Variogram(lag_set(0.02))
    vg.add(y, ok)
    return NoiseLevel(0.0025, 0.97, 1e4), vg


def test_results_do_not_depend_on_the_block_size():
    # the module's claim: the same events from blocks of 7 frames (live) and of 4096 (batch)
    t, y, _ = _session()
    noise, vg = _given(t, y)
    a = _run(PassDetector(0.02, noise=noise, variogram=vg), t, y, 7)
    b = _run(PassDetector(0.02, noise=noise, variogram=vg), t, y, 4096)
    assert len(a) == len(b) == 4
    for ea, eb in zip(a, b):
        assert ea.start_s == eb.start_s and ea.end_s == eb.end_s
        assert ea.peak_shift_hz == pytest.approx(eb.peak_shift_hz, rel=1e-9)


def test_live_learning_finds_the_pulses_with_their_signs():
    # Gaussian pulses of known height on white noise and drift; the noise is learned from the first
    # 30 s; each peak within 5 of its standard uncertainties of the truth (a loose but theory-based
    # band: the interval is 1.96 u at 95 %)
    t, y, truth = _session()
    det = PassDetector(0.02)
    events = _run(det, t, y, 25)
    assert det.ready
    assert len(events) == len(truth)
    for ev, (t0, a) in zip(events, truth):
        assert ev.start_s < t0 < ev.end_s
        assert abs(ev.peak_shift_hz - a) < 5 * ev.peak_u_hz
        assert ev.kind == ("ferrous" if a < 0 else "non-ferrous")
        assert ev.sign == np.sign(a)


def test_a_target_left_in_place_is_ended_at_the_longest_event():
    t = (np.arange(40000) + 0.5) * 0.02
    rng = np.random.default_rng(5)
    y = 20000.0 + 0.005 * rng.standard_normal(t.size) + np.where(t > 100.0, 0.5, 0.0)
    noise, vg = _given(t[:4000], y[:4000])
    det = PassDetector(0.02, DetectorSettings(max_event_s=60.0), noise=noise, variogram=vg)
    events = _run(det, t, y, 1000)
    assert events, "the step was not seen"
    first = events[0]
    assert first.start_s == pytest.approx(100.0, abs=1.0)
    assert first.duration_s == pytest.approx(60.0, abs=1.0)


def test_run_lengths_match_a_plain_loop():
    rng = np.random.default_rng(6)
    flags = rng.random(500) < 0.7
    for carry in (0, 5):
        ref, run = [], carry
        for f in flags:
            run = run + 1 if f else 0
            ref.append(run)
        assert run_lengths(flags, carry).tolist() == ref


def test_bad_frame_spacing_is_refused():
    with pytest.raises(ValueError):
        PassDetector(0.0)
