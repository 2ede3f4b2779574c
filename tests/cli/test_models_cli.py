"""``coil``, ``target`` and ``astable`` commands: JSON keys, coil files, one-line refusals."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest

from coilshift.cli import main as cli_main

LOOP = ["--turns", "20", "--inner-diameter-mm", "200", "--length-mm", "5", "--depth-mm", "5", "--awg", "22",
        "--cap-nf", "100"]


def run_main(capsys, *args):
    try:
        code = cli_main.main(list(args))
    except SystemExit as exc:      # usage errors leave through argparse
        code = exc.code
    out, err = capsys.readouterr()
    return code, out, err


def test_coil_json_keys(capsys):
    code, out, err = run_main(capsys, "coil", *LOOP, "--json")
    assert code == 0 and err == ""
    obj = json.loads(out)
    for key in ("inductance_uh", "resistance_ohm", "wire_length_m", "method", "accuracy_note", "mean_radius_mm",
                "exact_inductance_uh", "self_capacitance_pf", "srf_hz", "lc_freq_hz"):
        assert key in obj
    assert obj["inductance_uh"] > 0 and obj["lc_freq_hz"] > 0


def test_coil_text_and_tuning(capsys):
    code, out, _ = run_main(capsys, "coil", "--turns", "30", "--inner-diameter-mm", "25", "--length-mm", "30",
                            "--awg", "24", "--for-freq-hz", "100000")
    assert code == 0
    assert "current sheet" in out and "tuning capacitor" in out and "Medhurst" in out


def test_coil_from_file_with_override(tmp_path, capsys):
    path = tmp_path / "coil.json"
    path.write_text(json.dumps({"turns": 200, "inner_diameter_mm": 50, "length_mm": 10, "depth_mm": 5,
                                "awg": 26, "cap_nf": 100}))
    code, out, _ = run_main(capsys, "coil", "--coil", str(path), "--json")
    base = json.loads(out)
    code2, out2, _ = run_main(capsys, "coil", "--coil", str(path), "--cap-nf", "25", "--json")
    assert code == code2 == 0
    # a quarter of the capacitance doubles the LC frequency
    assert json.loads(out2)["lc_freq_hz"] == pytest.approx(2 * base["lc_freq_hz"], rel=1e-9)
    assert path.read_text().startswith("{")   # the file is only read


def test_target_json(capsys):
    code, out, err = run_main(capsys, "target", *LOOP, "--sphere", "steel:diameter_mm=12",
                              "--distances", "10,50", "--threshold-hz", "0.5", "--json")
    assert code == 0 and err == ""
    obj = json.loads(out)
    assert obj["distance_mm"] == [10.0, 50.0]
    assert all(s < 0 for s in obj["shift_hz"])
    assert obj["range_mm"] > 0 and obj["range_closed_form_mm"] > 0
    assert obj["target"]["name"] == "mild_steel"


def test_target_with_material_options(capsys):
    code, out, _ = run_main(capsys, "target", *LOOP, "--material", "copper", "--diameter-mm", "20",
                            "--threshold-hz", "1")
    assert code == 0 and "rises" in out and "range" in out and "buried services" in out
    code, out, _ = run_main(capsys, "target", *LOOP, "--conductivity-s-per-m", "1e6", "--mu-r", "1",
                            "--diameter-mm", "20", "--json")
    assert code == 0 and json.loads(out)["target"]["conductivity_s_per_m"] == 1e6


def test_target_threshold_from_a_noise_log(tmp_path, capsys):
    # The threshold is K x the overlapping Allan deviation at tau, the rule of analyze (K = 5 by
    # default); the reference ADEV comes from allantools (an independent library)
    allantools = pytest.importorskip("allantools")
    rng = np.random.default_rng(7)
    t = np.arange(600) * 0.05
    f = 35000.0 + 0.02 * rng.standard_normal(t.size)
    path = tmp_path / "quiet.csv"
    path.write_text("t_s,freq_hz\n" + "".join(f"{a:.3f},{b:.6f}\n" for a, b in zip(t, f)))
    code, out, err = run_main(capsys, "target", *LOOP, "--sphere", "cu:diameter_mm=20", "--noise-log", str(path),
                              "--tau-s", "1.0", "--json")
    assert code == 0, err
    taus, adev, _, _ = allantools.oadev(f, rate=20.0, data_type="freq", taus=[1.0])[:4]
    assert json.loads(out)["threshold_hz"] == pytest.approx(5.0 * adev[0], rel=1e-6)
    # the old spelling still works for one release: --sigmas S is K = S x sqrt(2), with a note
    code, out, err = run_main(capsys, "target", *LOOP, "--sphere", "cu:diameter_mm=20", "--noise-log", str(path),
                              "--tau-s", "1.0", "--sigmas", "3", "--json")
    assert code == 0 and "--sigmas is now --noise-factor" in err
    assert json.loads(out)["threshold_hz"] == pytest.approx(3 * np.sqrt(2) * adev[0], rel=1e-6)


def test_target_output_folder(tmp_path, capsys):
    out_dir = tmp_path / "pred"
    args = ["target", *LOOP, "--sphere", "brass:diameter_mm=15", "--distances", "10,40", "--threshold-hz", "0.2",
            "-o", str(out_dir)]
    code, out, err = run_main(capsys, *args)
    assert code == 0, err
    assert sorted(p.name for p in out_dir.iterdir()) == ["prediction.csv", "prediction.json", "shift_vs_distance.png"]
    rows = (out_dir / "prediction.csv").read_text().splitlines()
    assert rows[0] == "distance_mm,shift_hz,delta_l_uh,delta_r_ohm,delta_inv_q" and len(rows) == 3
    saved = json.loads((out_dir / "prediction.json").read_text())
    assert saved["range_mm"] > 0 and saved["target"]["name"] == "brass"
    before = (out_dir / "prediction.csv").read_bytes()
    code, _, err = run_main(capsys, *args)          # a second run must not overwrite
    assert code != 0 and "not empty" in err and (out_dir / "prediction.csv").read_bytes() == before


def test_astable_json(capsys):
    code, out, _ = run_main(capsys, "astable", "--r1-ohm", "3900", "--r2-ohm", "3000", "--cap-nf", "10", "--json")
    assert code == 0
    obj = json.loads(out)
    # NE555 datasheet: f = 1.44 / ((R1 + 2 R2) C), duty = (R1 + R2) / (R1 + 2 R2) [pub, REFERENCES
    # section 7]. The datasheet's 1.44 is 1/ln 2 = 1.4427 rounded (the capacitor swings between
    # 1/3 and 2/3 of the supply, so each half period is R C ln 2): 0.19 % apart, the tolerance.
    r1, r2, c = 3900.0, 3000.0, 10e-9
    assert obj["freq_hz"] == pytest.approx(1.44 / ((r1 + 2 * r2) * c), rel=2.0e-3)
    assert obj["freq_hz"] == pytest.approx(1 / (math.log(2) * (r1 + 2 * r2) * c), rel=1e-9)
    assert obj["duty"] == pytest.approx((r1 + r2) / (r1 + 2 * r2), rel=1e-9)
    code, out, _ = run_main(capsys, "astable", "--freq-hz", "10000")
    assert code == 0 and "wanted 10000 Hz" in out


@pytest.mark.parametrize("args", [
    ["coil", "--turns", "-5", "--inner-diameter-mm", "50", "--length-mm", "10"],
    ["coil", "--turns", "50", "--inner-diameter-mm", "0", "--length-mm", "10"],
    ["coil", "--turns", "50", "--inner-diameter-mm", "20", "--length-mm", "10", "--depth-mm", "0.1", "--awg", "26"],
    ["coil", "--turns", "50", "--inner-diameter-mm", "20", "--length-mm", "10", "--depth-mm", "-2"],
    ["coil", "--turns", "500", "--inner-diameter-mm", "20", "--length-mm", "10", "--awg", "26"],
    ["coil", "--turns", "50", "--inner-diameter-mm", "20", "--length-mm", "10", "--awg", "99"],
    ["coil", "--inner-diameter-mm", "20"],
    ["coil", "--coil", "/nonexistent/coil.json"],
    ["target", *LOOP, "--sphere", "unobtainium:diameter_mm=3"],
    ["target", *LOOP, "--material", "copper"],
    ["target", "--turns", "10", "--inner-diameter-mm", "100", "--length-mm", "1", "--sphere", "cu:diameter_mm=5"],
    ["target", *LOOP, "--sphere", "cu:diameter_mm=5", "--threshold-hz", "0"],
    ["target", *LOOP, "--sphere", "cu:diameter_mm=5", "--noise-hz", "0.1", "--threshold-hz", "1"],
    ["target", *LOOP, "--sphere", "cu:diameter_mm=5", "--noise-log", "/nonexistent/run"],
    ["astable", "--freq-hz", "1000", "--duty", "0.4"],
    ["astable", "--r1-ohm", "1000"],
])
def test_refusals_are_one_line(args, capsys):
    code, out, err = run_main(capsys, *args)
    assert code != 0 and out == ""
    assert err.count("\n") == 1 and err.startswith("coilshift") and "error:" in err


def test_bad_coil_file_named_in_the_message(tmp_path):
    path = tmp_path / "bad.json"
    path.write_text('{"turns": 10, "inner_diameter_mm": 50, "length_mm": 10, "wire": "thin"}')
    r = subprocess.run([sys.executable, "-m", "coilshift.cli.main", "coil", "--coil", str(path)],
                       capture_output=True, text=True, timeout=120)
    assert r.returncode != 0 and str(path) in r.stderr and "unknown key" in r.stderr
    assert r.stderr.count("\n") == 1 and "Traceback" not in r.stderr
