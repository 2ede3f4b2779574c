"""Several calibration runs side by side (e.g. two coils, two oscillators, before and after).

Targets are matched by name. The comparison is a table of ranges (with intervals) and calls per
target and run; the overlay of curves is drawn by :mod:`coilshift.analysis.report.plots_calibration`.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from coilshift.analysis.calibration.run import CalibrationResult


@dataclass(frozen=True)
class ComparisonRow:
    """One target across runs: per run (name -> value) its range, interval and call."""

    target: str
    range_mm: dict
    range_ci_mm: dict
    cls: dict

    def to_dict(self) -> dict:
        return {"target": self.target, "range_mm": dict(self.range_mm),
                "range_ci_mm": {k: (list(v) if v else None) for k, v in self.range_ci_mm.items()},
                "class": dict(self.cls)}


def unique_names(results: list[CalibrationResult]) -> list[str]:
    """Short run names (folder names), made unique with a numeric suffix where they collide.

    A suffix never produces a name another run already has: ``a/run``, ``b/run`` and ``c/run-2``
    are named ``run``, ``run-3`` and ``run-2`` (each run keeps its own outputs and column). Names
    are compared ignoring case, as the file systems of macOS and Windows compare them: ``Run`` and
    ``run`` would be one output folder there.
    """
    own = [_folder_name(r) for r in results]
    taken = {n.casefold() for n in own}
    used: set[str] = set()
    out = []
    for base in own:
        name, k = base, 1
        # taken: another run's own name
        while name.casefold() in used or (name != base and name.casefold() in taken):
            k += 1
            name = f"{base}-{k}"
        used.add(name.casefold())
        out.append(name)
    return out


def _folder_name(result: CalibrationResult) -> str:
    """The run's name as one plain folder name: a run given as ``.`` or ``..`` is named after the
    folder it is (its outputs would otherwise land beside the others', or outside the output
    folder altogether)."""
    name = result.name
    if name in ("", ".", "..") or "/" in name or "\\" in name:
        name = Path(result.source).resolve().name or "run"
    return name


def compare_runs(results: list[CalibrationResult], names: list[str] | None = None) -> list[ComparisonRow]:
    """Ranges and calls of every target across the runs (targets in first-seen order).

    A run without the target has no entry for it (the target is simply absent from its dicts).
    """
    names = names or unique_names(results)
    order: list[str] = []
    for r in results:
        for t in r.targets:
            if t.target not in order:
                order.append(t.target)
    rows = []
    for tname in order:
        rng, ci, cls = {}, {}, {}
        for run_name, r in zip(names, results):
            t = r.target(tname)
            if t is None:
                continue
            rng[run_name] = t.range.range_mm
            ci[run_name] = t.range.ci_mm
            cls[run_name] = t.cls
        rows.append(ComparisonRow(tname, rng, ci, cls))
    return rows
