"""The stability writer: four files, the documented columns and keys, the caller's summary."""

from __future__ import annotations

import csv
import io
import json

import numpy as np
import pytest

from coilshift.analysis.report.stability_outputs import stability_csv, write_stability_outputs
from coilshift.analysis.stability.analyse import analyse_stability
from coilshift.logger.runfolder.atomic import to_jsonable

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948, section 5.2)


@pytest.fixture(scope="module")
def result():
    # white FM around 25 kHz with a slow drift and a 30-frame gap, 0.02 s frames
    rng = np.random.default_rng(5)
    t = np.arange(3000) * 0.02
    f = 25000 + 0.05 * rng.standard_normal(t.size) + 0.2 / 60 * t
    f[1200:1230] = np.nan
    return analyse_stability(t, f, np.isfinite(f), frame_s=0.085)


def test_five_files_in_order(result, tmp_path):
    paths = write_stability_outputs(result, tmp_path)
    assert [p.name for p in paths] == ["sigma_tau.png", "drift.png", "stability.csv", "stability.json", "report.html"]
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(p.name for p in paths)
    for p in paths[:2]:
        assert p.read_bytes()[:8] == PNG_MAGIC


def test_json_is_the_result_or_the_given_summary(result, tmp_path):
    (tmp_path / "a").mkdir()
    write_stability_outputs(result, tmp_path / "a")
    assert json.loads((tmp_path / "a" / "stability.json").read_text()) == to_jsonable(result.to_dict())
    summary = {**result.to_dict(), "log_interrupted": True}
    (tmp_path / "b").mkdir()
    write_stability_outputs(result, tmp_path / "b", summary)
    got = json.loads((tmp_path / "b" / "stability.json").read_text())
    assert got["log_interrupted"] is True and got["tau_s"] == list(result.tau_s)


def test_csv_one_row_per_tau(result):
    rows = list(csv.DictReader(io.StringIO(stability_csv(result))))
    assert len(rows) == result.tau_s.size
    head = list(rows[0])
    assert head[:3] == ["tau_s", "m", "adev_hz"]
    assert head[-5:] == ["noise_slope", "noise_slope_lo", "noise_slope_hi", "noise_alpha", "noise_type"]
    for k in ("adev_hz", "oadev_lo_hz", "tdev_s", "tdev_hi_s", "mdev_edf", "oadev_n_terms", "oadev_frac"):
        assert k in head
    np.testing.assert_allclose([float(r["oadev_hz"]) for r in rows], result.oadev_hz, rtol=1e-9)
    assert [r["within_frame"] for r in rows] == [str(v) for v in result.within_frame()]
    # a row names a type only where the labeller did, and leaves it empty elsewhere
    assert [r["noise_type"] or None for r in rows] == result.noise_type
