"""What every report page says about itself, and how it reads in a browser: the provenance
header, the how-to-read box, no empty columns, shifts in ppm, the sensitivity near the range,
and (headless Chromium at 1280 px) inline images that decode and nothing wider than the page."""

from __future__ import annotations

import hashlib
import re

import pytest
from synthcal import make_run

import browser
from coilshift.analysis.calibration.run import analyse_run
from coilshift.analysis.report.calibration_html import sensitivity_hz_per_mm
from coilshift.analysis.report.calibration_outputs import write_outputs
from coilshift.analysis.report.html_page import provenance, table


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    d = tmp_path_factory.mktemp("page") / "bench"
    make_run(d, {"nail": (-25.0, 25.0), "foil": (9.0, 25.0), "plastic": lambda d: 0.0},
             distances_mm=(10, 20, 40, 80), dwell_s=4.0, noise_hz=0.03, phi=0.8, drift_hz_per_min=0.3, seed=21)
    res = analyse_run(d, n_boot=50)
    out = tmp_path_factory.mktemp("page-out")
    write_outputs([res], out, provenance([d], command="coilshift analyze bench -o out"))
    return d, res, out


def test_header_names_date_version_command_and_inputs_with_checksums(written):
    run_dir, _, out = written
    page = (out / "report.html").read_text()
    assert re.search(r"\d{4}-\d\d-\d\d \d\d:\d\d:\d\d UTC", page)
    assert "coilshift analyze bench -o out" in page
    from coilshift.logger.runfolder.writer import software_version

    assert software_version() in page
    # the checksum is hashlib's SHA-256 (FIPS 180-4) of the log as it is on disk
    assert hashlib.sha256((run_dir / "log.csv").read_bytes()).hexdigest() in page
    assert "How to read this report" in page


def test_points_in_ppm_and_the_sensitivity_near_the_range(written):
    _, res, out = written
    page = (out / "report.html").read_text()
    p = res.targets[0].points[0]
    # ppm of the baseline frequency, computed here from the numbers the analysis returns
    assert f"{1e6 * p.shift_hz / res.baseline_hz:+.4g}" in page
    nail = res.targets[0]
    assert nail.range.range_mm is not None
    s = sensitivity_hz_per_mm(nail)
    if nail.range.basis == "measured":
        # the slope between the two bracketing calibration points, written out independently
        d0, d1 = nail.range.bracket_mm
        y = {q.distance_mm: q.shift_hz for q in nail.points}
        assert s == pytest.approx((y[d1] - y[d0]) / (d1 - d0))
    assert f"{abs(s):.3g}" in page


def test_tables_leave_out_empty_columns():
    html = table(["a", "b", "c"], [["1", "-", ""], ["2", "nan", "x"]])
    assert "<th>a</th>" in html and "<th>b</th>" not in html and "<th>c</th>" in html
    assert table(["a"], []) == ""


def test_no_empty_measured_predicted_column_without_models(written):
    page = (written[2] / "report.html").read_text()
    assert "measured/predicted" not in page  # no target models were given
    assert "nan" not in re.sub(r"<[^>]+>|data:image/png;base64,[A-Za-z0-9+/=]+", " ", page).lower().split()


@pytest.fixture(scope="module")
def needs_chromium():
    if browser.chromium() is None:
        pytest.skip("chromium is not installed (CI installs it: .ci/run)")


def test_the_calibration_report_renders_in_chromium(written, needs_chromium, tmp_path):
    got = browser.probe(written[2] / "report.html", tmp_path)
    assert got["images"] == 4 and got["broken"] == [] and got["not_inline"] == [] and got["external"] == [], got
    assert got["scroll_width"] <= got["inner_width"] == browser.WIDTH_PX and got["wide"] == [], got


def test_the_browser_check_sees_a_broken_wide_page(needs_chromium, tmp_path):
    # the probe must be able to fail: a missing linked image and a 2000 px block
    bad = tmp_path / "bad.html"
    bad.write_text("<html><body><div style='width:2000px'>x</div><img src='gone.png' alt='gone'></body></html>")
    got = browser.probe(bad, tmp_path / "w")
    assert got["broken"] == ["gone"] and got["not_inline"] and got["scroll_width"] > browser.WIDTH_PX
