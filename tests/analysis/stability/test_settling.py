"""The settling fit: the bundled stability recording's known warm-up and drift, model choice,
and the cases where warm-up or drift cannot be determined."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from coilshift.analysis.stability.analyse import analyse_stability
from coilshift.analysis.stability.grid import to_uniform
from coilshift.analysis.stability.settling import fit_settling
from coilshift.cli.main import main
from coilshift.logger.runfolder.reader import read_log

SAMPLE = Path(__file__).resolve().parents[3] / "sample_data"


@pytest.fixture(scope="module")
def bundled(tmp_path_factory):
    """The bundled stability recording tracked with the default settings, and its truth."""
    run = tmp_path_factory.mktemp("stab") / "run"
    assert main(["track", str(SAMPLE / "stability" / "recording.flac"), "-o", str(run), "--quiet"]) == 0
    log = read_log(run, columns=("flags",))
    frame_s = log.meta["tracker"]["frame_ms"] / 1000.0
    res = analyse_stability(log.t_s, log.freq_hz, log.usable(), frame_s=frame_s)
    truth = json.loads((SAMPLE / "stability" / "truth.json").read_text())["script"]["oscillator"]
    return res, truth


def test_bundled_recording_warmup_and_drift(bundled):
    # sample_data/stability.json (the script the recording was simulated from): warm-up 0.6 Hz
    # decaying with a 25 s time constant from power-on at t = 0, and a temperature drift of
    # tempco x rate = -0.18 Hz/degC x 0.4 degC/h = -0.0012 Hz/min. Each must lie within three of
    # the fit's standard uncertainties (a 3-sigma miss has probability 0.27 % by chance).
    res, truth = bundled
    fit = res.settling
    assert fit.n_exp == 1
    tau_true = truth["warmup_tau_s"]
    a_true = truth["warmup_hz"] * math.exp(-fit.t_ref_s / tau_true)  # the amplitude at the first frame
    tau, u_tau = fit.taus_s[0], fit.taus_s[0] * fit.u_ln_taus[0]
    assert abs(tau - tau_true) <= 3 * u_tau and u_tau < 0.1 * tau_true
    assert abs(fit.amplitudes_hz[0] - a_true) <= 3 * fit.u_amplitudes_hz[0]
    drift_true = truth["tempco_hz_per_c"] * truth["temperature"]["rate_c_per_h"] / 60.0
    d = res.drift
    assert d.determined and abs(d.rate_hz_per_min - drift_true) <= 3 * d.u_rate_hz_per_min
    # the settled start by the formula t1 + tau ln(|a| / (tau r)) with the true a and tau [derived]
    r = res.warmup.threshold_hz_per_min / 60.0
    t_star = fit.t_ref_s + tau_true * math.log(a_true / (tau_true * r))
    assert res.span.kind == "settled"
    assert abs(res.warmup.t_settled_s - t_star) <= 3 * res.warmup.u_warmup_s + 3 * tau_true * fit.u_ln_taus[0]


def test_bundled_noise_model_describes_the_deviation(bundled):
    # the fitted white + random-walk FM model should lie inside the measured deviation's 95 %
    # interval at most averaging times: with n compared taus, more than 3 misses would happen by
    # chance with probability below 1 % (binomial, p = 0.05, n <= 9)
    res, _ = bundled
    nm = res.settling.noise
    assert nm.tau_fit_s.size >= 5 and nm.n_outside <= 3


def test_bundled_labels_agree_with_the_slope(bundled):
    # a label is given only where the slope's 95 % interval sits inside the type's band
    # (slope_id.BANDS, from NIST SP 1065 Table 11); none inside one tracker frame
    res, _ = bundled
    from coilshift.analysis.stability.slope_id import BANDS

    band = {name: (lo, hi) for name, lo, hi, _ in BANDS}
    nl = res.noise
    for i, name in enumerate(nl.label):
        if name is None:
            continue
        lo, hi = band[name]
        assert lo <= nl.slope_lo[i] <= nl.slope[i] <= nl.slope_hi[i] <= hi
        assert not res.within_frame()[i]
    assert "white FM" in nl.label  # the settled part is white FM at short tau (the script's 2 mHz)


def test_two_time_constants_are_told_apart():
    # noise-free two-term settling: the BIC must prefer two exponentials and find both
    t = np.arange(8000) * 0.05
    f = 1000 + 0.5 * np.exp(-t / 30) + 0.3 * np.exp(-t / 4) - 1e-4 * t
    f = f + 1e-4 * np.random.default_rng(7).standard_normal(t.size)
    fit = fit_settling(to_uniform(t, f))
    assert fit.n_exp == 2
    for tau, u, true in zip(fit.taus_s, fit.u_ln_taus, (4.0, 30.0)):
        assert abs(math.log(tau / true)) <= 3 * u
    assert abs(fit.drift_hz_per_s + 1e-4) <= 3 * fit.u_drift_hz_per_s


def test_too_short_for_a_noise_model():
    # three samples leave REML no degrees of freedom beside the line's two parameters
    fit = fit_settling(to_uniform(np.arange(3) * 1.0, np.array([1.0, 2.0, 1.5])))
    assert fit.n_exp == 0 and "too few usable blocks (3) to estimate the noise" in fit.note
    res = analyse_stability(np.arange(3) * 1.0, 1000 + np.array([0, 1, 0.5]))
    assert not res.drift.determined and "too few usable blocks" in res.drift.reason
    assert res.to_dict()["drift_hz_per_min"] is None and res.to_dict()["drift_u_hz_per_min"] is None
    res = analyse_stability(np.arange(8) * 1.0, 1000 + np.array([0, 1, 0, 2, 1, 0, 1, 2.0]))
    assert res.drift.determined and "no warm-up term tried" in res.drift.reason
