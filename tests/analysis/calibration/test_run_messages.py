"""Refusals of analyse_run and the target model name settings, which the CLI shows as options."""

from __future__ import annotations

import pytest
from synthcal import make_run

from coilshift.analysis.calibration.run import analyse_run
from coilshift.analysis.models.coil import CoilDesign, analyse_coil
from coilshift.analysis.models.target import parse_target_spec, predicted_response
from coilshift.cli.options import option_for
from coilshift.logger.errors import InputError


def test_target_models_without_a_coil(tmp_path):
    with pytest.raises(InputError) as exc:
        analyse_run(tmp_path / "never-read", target_models={"nail": parse_target_spec("steel:diameter_mm=5")})
    assert str(exc.value) == "target models need a coil (coil FILE) to predict a curve"
    assert "(--coil FILE)" in exc.value.render(option_for)


def test_run_without_markers(tmp_path):
    run = tmp_path / "run"
    make_run(run, {"nail": (-25.0, 25.0)}, distances_mm=(10, 20), dwell_s=2.0, seed=1)
    (run / "markers.csv").unlink()
    with pytest.raises(InputError) as exc:
        analyse_run(run)
    assert "no markers.csv in the run; give the stretches with markers_path FILE" in str(exc.value)
    assert exc.value.render(option_for).endswith("give the stretches with --markers FILE")


def test_no_operating_frequency():
    coil = analyse_coil(CoilDesign(turns=20, inner_diameter_mm=100, length_mm=10, awg=26))
    with pytest.raises(InputError) as exc:
        predicted_response(coil, parse_target_spec("steel:diameter_mm=5"), [10.0, 20.0])
    assert "give freq_hz or a tuning capacitor" in str(exc.value)
    assert "give --freq-hz or a tuning capacitor (cap_nf)" in exc.value.render(option_for)
