"""The simulated bench's coil (sim.benchcoil): its checks, its winding, its LC frequency, and the
analysis' coil report for the demo's coils checked against it (two code paths that share nothing)."""

from __future__ import annotations

import math

import pytest

import coilshift.sim.benchcoil as benchcoil
from coilshift.logger.errors import InputError
from coilshift.sim.benchcoil import bench_coil
from coilshift.sim.demo import COILS, calibration_script, stability_script
from coilshift.sim.inductance import winding_inductance_h
from coilshift.sim.render import plan, truth_for
from coilshift.sim.script import parse_script
from sim_helpers import script_dict


def _demo_coils():
    # the demo's coils as designed (its coil files) and as fitted on the bench (its scripts)
    out = {}
    for key, design in COILS.items():
        out[f"{key} designed"] = {k: v for k, v in design.items() if k != "name"}
        out[f"{key} fitted"] = calibration_script(key, 1)["oscillator"]["coil"]
    out["B-200 stability"] = stability_script(1)["oscillator"]["coil"]
    return out


DEMO_COILS = _demo_coils()


@pytest.mark.parametrize("name", list(DEMO_COILS))
def test_analysis_coil_report_agrees_with_the_bench_for_the_demo_coils(name):
    # The analysis (thin-ring GMD formula, Rosa & Grover 1912, picked for these bundle-wound loops)
    # against the simulator (quadrature of Maxwell's mutual inductance over the section).
    from coilshift.analysis.models.coil import analyse_coil, design_from_dict

    coil = DEMO_COILS[name]
    report = analyse_coil(design_from_dict(coil))
    bench = bench_coil(coil, name)
    l_uh = bench.inductance_h * 1e6
    assert report.method.startswith("thin ring")
    # docs/models.md: the thin-ring formula is within 1 % of the uniform-current-density value
    # (neglected terms of order (c/a)^2: (6/78)^2 = 0.6 % for A-150, (7/103.5)^2 = 0.5 % for B-200)
    assert l_uh == pytest.approx(report.inductance_uh, rel=0.01)
    c_over_a = (coil["depth_mm"] + coil["length_mm"]) / 2 / report.mean_radius_mm
    assert abs(l_uh / report.inductance_uh - 1) < c_over_a ** 2
    # the analysis' own filament sum of the same uniform density, to its cell discretisation (1e-4)
    assert l_uh == pytest.approx(report.numeric_inductance_uh, rel=1e-4)
    # f = 1/(2 pi sqrt(L C)) on both sides with the same C (no self-capacitance for a multilayer in
    # the analysis, none in the simulator): f^2 L agrees exactly, so f differs by half L's error
    f_bench = bench.lc_freq_hz
    assert f_bench ** 2 * l_uh == pytest.approx(report.lc_freq_hz ** 2 * report.inductance_uh, rel=1e-12)
    assert f_bench == pytest.approx(report.lc_freq_hz, rel=0.005)
    # Thomson's formula written here
    assert f_bench == pytest.approx(1 / (2 * math.pi * math.sqrt(bench.inductance_h * coil["cap_nf"] * 1e-9)),
                                    rel=1e-14)


def test_single_layer_sheet_sits_at_the_wire_centres_and_self_capacitance_is_left_out():
    from coilshift.analysis.models.coil import analyse_coil, design_from_dict

    coil = {"turns": 30, "inner_diameter_mm": 50, "length_mm": 40, "awg": 26, "cap_nf": 10}
    bench = bench_coil(coil, "c")
    # ASTM B258 (REFERENCES 6 [pub]): 26 AWG is 0.40489 mm bare; the sheet is half a wire out
    assert bench.winding.inner_radius_m == pytest.approx(25e-3 + 0.5 * 0.40489e-3, rel=1e-6)
    assert bench.winding.outer_radius_m == bench.winding.inner_radius_m
    assert bench.inductance_h == winding_inductance_h(30, bench.winding.inner_radius_m,
                                                      bench.winding.inner_radius_m, 0.040)
    # the analysis adds Medhurst's self-capacitance to cap_nf for a single layer; the bench does
    # not: f^2 L C (bench) = f^2 L (C + C_self) (analysis) up to the two inductances' ratio
    report = analyse_coil(design_from_dict(coil))
    c_f = 10e-9
    lhs = bench.lc_freq_hz ** 2 * bench.inductance_h * c_f
    rhs = report.lc_freq_hz ** 2 * report.inductance_h * (c_f + report.self_capacitance_pf * 1e-12)
    assert lhs == pytest.approx(rhs, rel=1e-12)
    assert bench_coil(dict(coil, cap_nf=None), "c").lc_freq_hz is None


def test_the_quadrature_runs_once_per_coil(monkeypatch):
    # the tone, the responses and truth.json share one L, computed once however often it is asked for
    calls = []

    def counting(*args):
        calls.append(args)
        return winding_inductance_h(*args)

    benchcoil._inductance_h.cache_clear()
    monkeypatch.setattr(benchcoil, "winding_inductance_h", counting)
    s = parse_script(calibration_script("A-150", 1), "demo")
    truth = truth_for(plan(s))
    assert len(calls) == 1
    assert truth["oscillator"]["inductance_uh"] == pytest.approx(winding_inductance_h(*calls[0]) * 1e6, rel=1e-15)
    benchcoil._inductance_h.cache_clear()


_GOOD = {"turns": 40, "inner_diameter_mm": 150, "length_mm": 6, "depth_mm": 6, "awg": 26, "cap_nf": 220}


@pytest.mark.parametrize("changes, needle", [
    ({"colour": "red"}, "unknown key(s) colour"),
    ({"turns": None}, "missing key(s) turns"),
    ({"turns": "many"}, "turns must be a number"),
    ({"turns": 0.5}, "turns must be from 1"),
    ({"depth_mm": -1}, "depth_mm must be zero or more"),
    ({"inner_diameter_mm": 0}, "inner_diameter_mm must be positive"),
    ({"length_mm": 30000}, "dimensions above 20 m"),
    ({"cap_nf": 1e12}, "cap_nf must be from"),
    ({"temp_c": 400}, "temp_c must be between"),
    ({"wire_diameter_mm": 0.4}, "give awg or wire_diameter_mm, not both"),
    ({"awg": "thick"}, "not a wire gauge"),
    ({"awg": 70}, "gauge must be a whole number"),
    ({"awg": "00000", "length_mm": 500}, "not a wire gauge"),
    ({"awg": "nan"}, "not a wire gauge"),
    ({"awg": True}, "not a wire gauge"),
    ({"awg": None, "outer_wire_diameter_mm": 0.45}, "outer_wire_diameter_mm needs awg"),
    ({"outer_wire_diameter_mm": 0.3}, "less than the bare wire"),
    ({"turns": 1e300}, "turns must be from 1"),
    ({"cap_nf": float("nan")}, "cap_nf must be a finite number"),
    ({"wire_diameter_mm": -0.4, "awg": None}, "wire_diameter_mm must be positive"),
    ({"insulation": "paper"}, "insulation must be one of"),
    ({"turns": 400}, "need at least"),            # 400 turns of 0.4 mm wire in 6 x 6 mm
    ({"depth_mm": 0}, "in one layer"),           # 40 turns side by side in 6 mm
    ({"depth_mm": 0.2}, "less than one wire"),
])
def test_impossible_coils_are_refused_on_one_line(changes, needle):
    from coilshift.analysis.models.coil import design_from_dict

    coil = {k: v for k, v in {**_GOOD, **changes}.items() if v is not None}
    d = script_dict(oscillator={"coil": coil})
    d["oscillator"].pop("freq_hz")
    with pytest.raises(InputError) as err:
        parse_script(d, "bench.json")
    msg = str(err.value)
    assert msg.startswith("bench.json: oscillator.coil: ") and needle in msg and "\n" not in msg
    # the analysis, reading the same description as a coil file, refuses it too
    with pytest.raises(InputError):
        design_from_dict(coil)


def test_a_coil_without_a_capacitor_sets_no_frequency():
    d = script_dict(oscillator={"coil": {k: v for k, v in _GOOD.items() if k != "cap_nf"}})
    d["oscillator"].pop("freq_hz")
    with pytest.raises(InputError, match="oscillator.coil: needs 'cap_nf'"):
        parse_script(d, "bench.json")
