"""Noise labels from the local slope of the overlapping Allan deviation (slope_id).

Pure power-law noise comes from allantools' implementation of Kasdin & Walter's generator
(N. J. Kasdin and T. Walter, "Discrete simulation of power law noise", Proc. 1992 IEEE
Frequency Control Symposium), independent of this project; slopes per type are NIST SP 1065
Table 11. A label is claimed only where the slope's 95 % interval lies inside the type's band,
so a label naming the wrong type needs the interval to miss the true slope: at most 5 % of
the averaging times, less since the interval is conservative. The tolerance adds 3 binomial
standard deviations.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from coilshift.analysis.stability import allan
from coilshift.analysis.stability.noise_model import discrete_avar
from coilshift.analysis.stability.slope_id import BANDS, LABEL_CONFIDENCE, label_noise

allantools = pytest.importorskip("allantools")

# Kasdin's phase exponent b (S_x ~ f^b) -> the type the overlapping ADEV slope names
EXPECTED = {0: "white or flicker PM", -1: "white or flicker PM", -2: "white FM", -3: "flicker FM",
            -4: "random-walk FM"}
N_SEEDS = 12
P_MISS = 1 - LABEL_CONFIDENCE


def _labels(y):
    ms = allan.octave_factors(y.size)
    dev, _ = allan.oadev(y, ms)
    return label_noise(ms * 1.0, dev, ms, [y.size], np.ones(ms.size, bool)), ms


def _bound(p: float, n: int) -> float:
    return p + 3 * math.sqrt(p * (1 - p) / n)


@pytest.mark.parametrize("b", sorted(EXPECTED))
def test_pure_power_law_noise_is_named_right_or_not_at_all(b):
    wrong = total = 0
    named_short = []
    state = np.random.get_state()
    try:
        for seed in range(N_SEEDS):
            np.random.seed(1000 + seed)  # the generator draws from numpy's global generator
            gen = allantools.Noise(2 ** 14 + 1, 1.0, b)
            gen.generateNoise()
            labels, _ = _labels(np.diff(gen.time_series))  # phase -> frequency
            total += len(labels.label)
            wrong += sum(lab is not None and lab != EXPECTED[b] for lab in labels.label)
            named_short.append(sum(lab == EXPECTED[b] for lab in labels.label[:4]))
    finally:
        np.random.set_state(state)
    assert wrong / total <= _bound(P_MISS, total)
    # where thousands of terms stand behind each point the slope is sharp enough to name the type
    assert np.mean(named_short) >= 3


def _secant(q: float, m: float) -> float:
    """True centred slope of the overlapping ADEV at m for white FM + random-walk FM (the
    labeller's secant over m/2 .. 2m)."""
    return 0.5 * math.log(discrete_avar(2 * m, 1.0, q * q) / discrete_avar(m / 2, 1.0, q * q)) / math.log(4)


@pytest.mark.parametrize("edge", [-0.25, 0.25])
def test_mixture_no_label_at_band_edges_and_none_wrong(edge):
    # white FM (variance 1 per sample) plus random-walk FM: the exact Allan variance is
    # 1/m + q^2 (2m^2 + 1)/(6m) [noise_model.discrete_avar, derived from the definition]; q is
    # chosen so that the true slope at m = 64 lies exactly on a band edge (white/flicker FM at
    # -1/4, flicker/random-walk FM at +1/4), where no type may be claimed
    q = brentq(lambda x: _secant(x, 64.0) - edge, 1e-4, 10.0)
    rng = np.random.default_rng(8)
    wrong = total = 0
    at_edge = []
    for _ in range(N_SEEDS):
        n = 2 ** 15
        y = rng.standard_normal(n) + q * np.cumsum(rng.standard_normal(n))
        labels, ms = _labels(y)
        avar = discrete_avar(ms, 1.0, q * q)
        for i, lab in enumerate(labels.label):
            a, c = max(i - 1, 0), min(i + 1, ms.size - 1)
            true = 0.5 * math.log(avar[c] / avar[a]) / math.log(ms[c] / ms[a])
            total += 1
            if lab is not None:
                lo, hi = next((lo, hi) for name, lo, hi, _ in BANDS if name == lab)
                wrong += not lo <= true <= hi
            if ms[i] == 64:
                at_edge.append((lab, 0.5 * (labels.slope_hi[i] - labels.slope_lo[i])))
    assert wrong / total <= _bound(P_MISS, total)
    # on the edge a label needs the estimate a half-width h from its true value; the estimate's
    # sd is at most h / 1.96 (the interval is conservative), so a label has probability <= 5 %
    labelled = sum(lab is not None for lab, _ in at_edge)
    assert all(np.isfinite(h) for _, h in at_edge)
    assert labelled <= N_SEEDS * P_MISS + 3 * math.sqrt(N_SEEDS * P_MISS * (1 - P_MISS))
