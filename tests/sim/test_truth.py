"""The simulator's own truth for physical targets (sim.inductance, sim.sphere, sim.materials) against
published values and independent computations written here, and its independence from the analysis."""

from __future__ import annotations

import ast
import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy.special import ellipe, ellipk

import coilshift.sim.inductance as sim_ind
from coilshift.sim.inductance import MU0_H_PER_M, mutual_circles_h, winding_inductance_h
from coilshift.sim.materials import BENCH_MATERIALS, bench_material
from coilshift.sim.sphere import sphere_kappa

SIM_DIR = Path(__file__).resolve().parents[2] / "sim"


#: the modules of sim/ that drive the analysis on the simulated data (they are the demo, not the
#: truth), each with the reason it may import the analysis side
DRIVES_THE_ANALYSIS = {
    "demo.py": "runs the calibration and stability analyses on the demo's recordings and compares "
               "their ranges with the truth",
    "demo_passes.py": "runs the analysis' event finder on the demo's hand-pass session",
    "demo_report.py": "writes the demo's page with the analysis' HTML helpers",
}
#: every other module of sim/ builds the truth (script, coil, tone, responses, log sessions)
TRUTH_MODULES = sorted(p.name for p in SIM_DIR.glob("*.py") if p.name not in DRIVES_THE_ANALYSIS)


def _imported_names(tree: ast.AST) -> list[str]:
    """Every module an import statement, at module level or inside a function, names (with
    ``from a import b`` as both a and a.b), and the literal argument of importlib.import_module
    and __import__ calls."""
    names = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names += [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            head = "." * node.level + (node.module or "")
            names += [head] + [f"{head}.{a.name}" for a in node.names]
        elif isinstance(node, ast.Call):
            f = node.func
            fname = f.attr if isinstance(f, ast.Attribute) else getattr(f, "id", "")
            if fname in ("import_module", "__import__") and node.args:
                arg = node.args[0]
                names.append(arg.value if isinstance(arg, ast.Constant) else "<computed>")
    return names


def test_the_module_lists_cover_sim():
    # the exceptions exist (a renamed demo module must not leave a stale allowance), they do use
    # the analysis (so the allowance is needed), and the truth list holds the modules named in the task
    for name in DRIVES_THE_ANALYSIS:
        assert (SIM_DIR / name).is_file(), name
        assert any("analysis" in n for n in _imported_names(ast.parse((SIM_DIR / name).read_text()))), name
    assert {"script.py", "benchcoil.py", "render.py", "response.py", "fields.py", "inductance.py", "sphere.py",
            "materials.py", "oscillator.py", "passes.py", "logsession.py", "passstudy.py"} <= set(TRUTH_MODULES)


def test_the_import_parse_sees_every_form():
    # the checker itself, on imports written every way (one per line), at module level and in a function
    src = ("import coilshift.analysis.models\n"
           "from coilshift import analysis\n"
           "from ..analysis.models import coil\n"
           "def f():\n"
           "    from coilshift.analysis.models.coil import analyse_coil\n"
           "    importlib.import_module('coilshift.analysis.models.target')\n"
           "    __import__(name)\n")
    hits = [n for n in _imported_names(ast.parse(src)) if "analysis" in n or n == "<computed>"]
    assert hits == ["coilshift.analysis.models", "coilshift.analysis", "..analysis.models",
                    "..analysis.models.coil", "coilshift.analysis.models.coil",
                    "coilshift.analysis.models.coil.analyse_coil", "coilshift.analysis.models.target",
                    "<computed>"]


@pytest.mark.parametrize("module", TRUTH_MODULES)
def test_truth_modules_import_nothing_from_the_analysis(module):
    # issue 18: the simulated "true" response must come from a code path of its own
    names = _imported_names(ast.parse((SIM_DIR / module).read_text()))
    assert not [n for n in names if "analysis" in n or n == "<computed>"], names


def test_building_the_truth_loads_no_analysis_module():
    # at run time too: a script with a coil and a physical target parsed, rendered and its truth
    # built, in a fresh interpreter, leaves no coilshift.analysis module loaded
    script = {"oscillator": {"coil": {"turns": 32, "inner_diameter_mm": 200, "length_mm": 7, "depth_mm": 7,
                                      "awg": 25, "cap_nf": 263}},
              "targets": {"steel": {"material": "mild_steel", "diameter_mm": 25, "mu_r": 70, "finite_size": True},
                          "alu": {"material": "aluminium", "diameter_mm": 25}},
              "session": {"move_s": 0.1, "steps": [{"target": "baseline", "hold_s": 0.2},
                                                   {"target": "steel", "distance_mm": 30, "hold_s": 0.2},
                                                   {"target": "alu", "distance_mm": 30, "hold_s": 0.2}]}}
    code = ("import json, sys\n"
            "from coilshift.sim.script import parse_script\n"
            "from coilshift.sim.render import plan, render_array, truth_for\n"
            f"s = parse_script(json.loads({json.dumps(json.dumps(script))}), 'bench')\n"
            "render_array(s)\n"
            "truth_for(plan(s))\n"
            "print(sorted(m for m in sys.modules if m.startswith('coilshift.analysis')))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "[]"


@pytest.mark.parametrize("a_m, b_m, d_m", [(0.05, 0.05, 0.001), (0.05, 0.06, 0.02), (0.1, 0.02, 0.3),
                                           (0.075, 0.0751, 0.0)])
def test_mutual_inductance_against_maxwells_first_form(a_m, b_m, d_m):
    # Maxwell, Treatise (1891) art. 701, first form (also Jackson 3rd ed. eq. 5.37 for A_phi):
    # M = mu0 sqrt(ab) [(2/k - k) K(k) - (2/k) E(k)], k^2 = 4ab / ((a+b)^2 + d^2)
    m = 4 * a_m * b_m / ((a_m + b_m) ** 2 + d_m ** 2)
    k = math.sqrt(m)
    want = MU0_H_PER_M * math.sqrt(a_m * b_m) * ((2 / k - k) * ellipk(m) - (2 / k) * ellipe(m))
    assert float(mutual_circles_h(a_m, b_m, d_m)) == pytest.approx(want, rel=1e-11)


def test_mutual_inductance_far_apart_is_two_dipoles():
    # two coaxial magnetic dipoles pi a^2 and pi b^2 at distance d >> a, b (Jackson 5.56):
    # M = mu0 pi a^2 b^2 / (2 d^3) (1 + O((a/d)^2))
    a, b, d = 0.01, 0.02, 2.0
    assert float(mutual_circles_h(a, b, d)) == pytest.approx(MU0_H_PER_M * math.pi * a * a * b * b / (2 * d ** 3),
                                                             rel=1e-3)


# Grover, Inductance Calculations (Dover), Table 36: Nagaoka's coefficient K against l/D [pub]
@pytest.mark.parametrize("l_over_d, k_table", [(0.10, 0.203324), (0.25, 0.365432), (0.50, 0.525510),
                                               (1.00, 0.688423)])
def test_current_sheet_against_grovers_table(l_over_d, k_table):
    a, n = 0.05, 10.0
    length = 2 * a * l_over_d
    l_h = winding_inductance_h(n, a, a, length)
    # current sheet L = mu0 pi a^2 N^2 K / l (Lorenz; Nagaoka 1909)
    assert l_h * length / (MU0_H_PER_M * math.pi * a * a * n * n) == pytest.approx(k_table, abs=1.5e-6)


def test_current_sheet_worked_value():
    # REFERENCES section 5 [derived from the exact formula]: 20 turns, D = 1 in, l = 1 in: 6.9032 uH
    assert winding_inductance_h(20, 0.0127, 0.0127, 0.0254) * 1e6 == pytest.approx(6.9032, abs=5e-5)


def test_small_square_section_is_maxwells_thin_ring():
    # Maxwell's GMD method (Rosa & Grover 1912): L = mu0 a [ln(8a/g) - 2], the GMD of a square of
    # side b from itself g = 0.44705 b [pub]; neglected terms O((b/a)^2), here 2.5e-5
    a, b = 0.1, 0.0005
    want = MU0_H_PER_M * a * (math.log(8 * a / (0.44705 * b)) - 2)
    assert winding_inductance_h(1, a - b / 2, a + b / 2, b) == pytest.approx(want, rel=1e-5)


@pytest.mark.parametrize("turns, r_in_m, r_out_m, length_m", [(40, 0.075, 0.081, 0.006), (200, 0.025, 0.030, 0.010),
                                                               (50, 0.02, 0.06, 0.002), (500, 0.021, 0.039, 0.020)])
def test_section_quadrature_has_converged(monkeypatch, turns, r_in_m, r_out_m, length_m):
    # an independent check of the rule itself: twice the nodes in every direction move L by < 1e-6
    base = winding_inductance_h(turns, r_in_m, r_out_m, length_m)
    monkeypatch.setattr(sim_ind, "OUTER_NODES", 2 * sim_ind.OUTER_NODES)
    monkeypatch.setattr(sim_ind, "ANGLE_NODES", 2 * sim_ind.ANGLE_NODES)
    monkeypatch.setattr(sim_ind, "RADIAL_NODES", 2 * sim_ind.RADIAL_NODES)
    assert base == pytest.approx(winding_inductance_h(turns, r_in_m, r_out_m, length_m), rel=1e-6)


def _wait_tanh_kappa(radius_m, sigma, mu_r, freq_hz):
    # REFERENCES section 8 [pub], Wait (1951): m = (4 pi/3) R^3 chi H0, alpha = sqrt(i w mu sigma) R,
    # chi = (3/2) [2 mu (tanh a - a) + mu0 (a^2 tanh a - a + tanh a)] /
    #              [mu (tanh a - a) - mu0 (a^2 tanh a - a + tanh a)];  kappa = chi / 3
    a = np.sqrt(1j * 2 * np.pi * freq_hz * mu_r * MU0_H_PER_M * sigma) * radius_m
    t = np.tanh(a)
    f1, f2 = t - a, a * a * t - a + t
    return complex(0.5 * (2 * mu_r * f1 + f2) / (mu_r * f1 - f2))


@pytest.mark.parametrize("radius_m, sigma, mu_r, freq_hz", [
    (0.0125, 5.8e7, 1.0, 1e4), (0.0125, 1 / 0.143e-6, 100.0, 1e4), (0.005, 3.5e7, 1.0, 2e3),
    (0.0125, 7e6, 70.0, 500.0), (0.05, 5.8e7, 1.0, 1e5), (0.002, 1 / 0.72e-6, 1.0, 1e4)])
def test_sphere_against_waits_tanh_form(radius_m, sigma, mu_r, freq_hz):
    # |a| from about 1 to 300: the tanh form has no cancellation there, so it is a sharp reference
    got = sphere_kappa(radius_m, sigma, mu_r, freq_hz)
    assert got == pytest.approx(_wait_tanh_kappa(radius_m, sigma, mu_r, freq_hz), rel=1e-10)
    assert got.imag < 0   # e^{iwt}: a lossy sphere lags


def test_sphere_limits():
    # static permeable sphere (mu_r - 1)/(mu_r + 2): 0.970588 for mu_r = 100 (REFERENCES 8 [derived])
    assert sphere_kappa(0.01, 0.0, 100.0, 1e4) == pytest.approx(0.970588, abs=1e-6)
    assert sphere_kappa(0.01, 1e3, 100.0, 1e-3) == pytest.approx(0.970588, abs=1e-6)
    # perfect conductor -1/2, approached as -(1/2)(1 - 3/a + 3/a^2) (Wait 1951, from memory), so
    # |kappa + 1/2| = 1.5/|a| to O(1/a^2); here |a| is about 9e4
    big = sphere_kappa(1.0, 1e9, 1.0, 1e6)
    a_abs = math.sqrt(2 * np.pi * 1e6 * MU0_H_PER_M * 1e9)
    assert abs(big + 0.5) == pytest.approx(1.5 / a_abs, rel=1e-3) and big.real > -0.5
    # weak non-magnetic conductor: kappa = -a^2/30 = -i w mu0 sigma R^2 / 30 (first term of Wait's series)
    r, s, f = 0.001, 5.8e7, 1.0
    assert sphere_kappa(r, s, 1.0, f) == pytest.approx(-1j * 2 * np.pi * f * MU0_H_PER_M * s * r * r / 30, rel=1e-3)
    # both evaluation forms of the Bessel functions meet at the switch (|x| = 1) without a step
    x_one_sigma = 1.0 / (2 * np.pi * 1e3 * MU0_H_PER_M * 0.01 ** 2)
    lo, hi = (sphere_kappa(0.01, x_one_sigma * q, 1.0, 1e3) for q in (0.999999, 1.000001))
    assert lo == pytest.approx(hi, rel=1e-5)


def test_bench_materials():
    # IEC 60028 annealed copper: 1/0.017241 ohm mm^2/m = 58.0 MS/m [pub]; IEC 60889 aluminium 0.028264
    assert BENCH_MATERIALS["copper"].sigma_s_per_m == pytest.approx(58.0e6, rel=5e-5)
    assert BENCH_MATERIALS["aluminium"].sigma_s_per_m == pytest.approx(1 / 0.028264e-6, rel=1e-12)
    assert bench_material("Steel").name == "mild_steel" and bench_material("non-metal").name == "plastic"
    assert bench_material("unobtainium") is None
    for m in BENCH_MATERIALS.values():
        assert m.source and m.mu_r > 0 and m.sigma_s_per_m >= 0
