"""The 13 hand-planted bugs that once survived the tests, each against the test written to catch it.

For every class of benchmarks/mutation_survivors.md this plants the bug (one text replacement in
one module of a scratch copy of the repository, never in the repository itself), runs the named
test, and checks that it fails; with nothing planted the same tests must pass.

Usage (from the repository root, through the shared test lock)::

    flock /tmp/coilshift-tests.lock nice -n 19 python benchmarks/planted_bugs.py
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from mutation_score import ROOT, _scratch_copy  # noqa: E402

T_CAL = "tests/analysis/calibration/test_error_propagation.py"
#: (class, module, text in the module, planted replacement, test that must fail)
BUGS = [
    ("interpolated-baseline variance with unsquared weights", "analysis/calibration/steps.py",
     "var_b = sum((w * e) ** 2 for _, w, e in terms)", "var_b = sum(w * e ** 2 for _, w, e in terms)",
     f"{T_CAL}::test_interpolated_baseline_variance_squares_the_weights"),
    ("repeat-consistency chi2 with k instead of k-1 dof", "analysis/calibration/steps.py",
     "dof = len(group) - 1", "dof = len(group)",
     f"{T_CAL}::test_repeat_consistency_test_has_k_minus_1_degrees_of_freedom"),
    ("fit covariance never scaled by chi2/dof", "analysis/calibration/curvefit.py",
     "pcov = pcov * (chi2 / dof)", "pcov = pcov",
     f"{T_CAL}::test_fit_covariance_is_scaled_by_chi2_per_dof_above_one"),
    ("extrapolated interval ignoring the fit's (Birge-scaled) covariance", "analysis/calibration/detection.py",
     "float(placement_mm), curve.shape(), _shape_draws(curve))", "float(placement_mm), curve.shape(), None)",
     f"{T_CAL}::test_extrapolated_interval_widens_with_the_fits_chi2_per_dof"),
    ("reported TDEV with /3 instead of /sqrt 3", "analysis/stability/analyse.py",
     "td_s = tau / np.sqrt(3.0) * md_hz / nominal", "td_s = tau / 3.0 * md_hz / nominal",
     "tests/analysis/stability/test_reported_deviations.py::test_reported_tdev_matches_allantools"),
    ("MDEV at the edge N = 3m - 1", "analysis/stability/allan.py",
     "return _deviation(y, m_list, lambda m: 3 * m - 1, _mdev_terms)",
     "return _deviation(y, m_list, lambda m: 3 * m, _mdev_terms)",
     "tests/analysis/stability/test_reported_deviations.py::test_mdev_at_the_shortest_record_n_equals_3m_minus_1"),
    ("harmonic-support rule of the subharmonic search", "logger/tracking/fundamental.py",
     "counts = np.add.reduceat(support, starts, axis=1, dtype=np.int64) + 1",
     "counts = np.add.reduceat(support, starts, axis=1, dtype=np.int64) + 2",
     "tests/logger/tracking/test_fundamental_support.py"),
    ("sine fit's wild-step guard", "logger/tracking/sinefit.py",
     "(np.abs(step_hz) > sample_rate_hz / n)", "(np.abs(step_hz) > np.inf)",
     "tests/logger/tracking/test_sinefit.py::test_wild_step_is_refused_not_taken"),
    ("Jacobsen Q for Hamming", "logger/tracking/estimators.py",
     '"hamming": 0.60', '"hamming": 0.55',
     "tests/logger/tracking/test_estimators.py::test_jacobsen_windowed_hamming_uses_its_own_q"),
    ("marker baseline as a mean instead of a median", "logger/pipeline/baseline.py",
     "return Baseline(float(np.median(f)), METHOD_MARKERS,", "return Baseline(float(np.mean(f)), METHOD_MARKERS,",
     "tests/logger/pipeline/test_baseline.py::test_markers_baseline_is_the_median_not_the_mean_of_unequal_stretches"),
    ("reported Nagaoka coefficient (l/r for l/D)", "analysis/models/winding.py",
     "nagaoka = ind.nagaoka_coefficient(design.length_mm / (2.0 * mean_r_mm))",
     "nagaoka = ind.nagaoka_coefficient(design.length_mm / mean_r_mm)",
     "tests/analysis/models/test_coil.py::test_reported_nagaoka_coefficient_is_grovers"),
    ("LC frequency ignoring self-capacitance", "analysis/models/coil.py",
     "c_total = design.cap_nf * 1e-9 + (cself or 0.0) * 1e-12", "c_total = design.cap_nf * 1e-9",
     "tests/analysis/models/test_coil.py::test_lc_frequency_includes_the_self_capacitance"),
    ("555 suggest_cap_nf off by a factor 2", "analysis/models/timer555.py",
     "nearest_standard(1e9 / (LN2 * freq_hz * target_r_ohm), series)",
     "nearest_standard(2e9 / (LN2 * freq_hz * target_r_ohm), series)",
     "tests/analysis/models/test_timer555.py::test_suggest_cap_nf_follows_the_datasheet_formula"),
]


def _pytest(repo: Path, import_dir: Path, test: str) -> int:
    env = {"PYTHONPATH": str(import_dir), "PYTHONDONTWRITEBYTECODE": "1", "PATH": "/usr/bin:/bin"}
    cmd = [sys.executable, "-m", "pytest", "-x", "-q", "-p", "no:cacheprovider", test]
    return subprocess.run(cmd, cwd=repo, env=env, capture_output=True, text=True, timeout=600).returncode


def main() -> int:
    bad = 0
    with tempfile.TemporaryDirectory(prefix="coilshift-planted-") as tmp:
        repo = _scratch_copy(Path(tmp))
        import_dir = Path(tmp) / "_import"
        for name, module, old, new, test in BUGS:
            path = repo / module
            src = path.read_text()
            if src.count(old) != 1:
                print(f"?  {name}: the text to replace is not found once in {module} (code moved?)")
                bad += 1
                continue
            clean = _pytest(repo, import_dir, test)
            path.write_text(src.replace(old, new))
            try:
                planted = _pytest(repo, import_dir, test)
            finally:
                path.write_text(src)
            ok = clean == 0 and planted != 0
            bad += not ok
            print(f"{'ok' if ok else 'NO'} {name}: passes clean ({clean == 0}), fails planted ({planted != 0})"
                  f"  -> {test}", flush=True)
    print(f"\n{len(BUGS) - bad} of {len(BUGS)} planted bugs caught")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
