"""Mutation score of the test suite on the main computation modules.

Plants one small plausible bug at a time (an arithmetic or comparison operator swapped, a constant
off by one or by a factor, a sign dropped, a square root or a boolean operator changed) in a scratch
copy of the repository, runs the tests that mirror the mutated module, and counts the mutants the
tests kill. A surviving mutant is either a gap in the tests or an equivalent mutant (one that cannot
change any result); the survivors are listed with their line so each can be killed or explained
(``benchmarks/mutation_survivors.md``).

Usage (from the repository root, with the project installed)::

    python benchmarks/mutation_score.py                      # the default module set, all mutants
    python benchmarks/mutation_score.py analysis/stability/allan.py --max 40 --seed 1
    python benchmarks/mutation_score.py --list               # only list the mutation sites
    python benchmarks/mutation_score.py analysis/calibration/steps.py --index 12 --tests tests/x.py
                                                             # one planted bug against one test file

Each mutant runs ``pytest -x -q`` on the module's test folder(s) in a subprocess with a timeout;
the repository itself is never modified (the copy lives in a temporary folder, imported first
through ``PYTHONPATH``). Lines ending in ``# pragma: no mutate`` are skipped (only for lines whose
mutants are equivalent, with the reason in the comment). A single mutant judged equivalent is listed
in ``benchmarks/mutation_equivalent.txt`` (module, source line, mutation, why; a mutation that occurs
twice on its line carries ``#k``, see :func:`equivalence_key`); it is reported as
``E`` and left out of the score. Run it with ``nice -n 19`` through the shared test lock, one
module at a time and with ``--max`` so one batch stays under about ten minutes.
"""

from __future__ import annotations

import argparse
import ast
import json
import os
import random
import re
import shutil
import subprocess
import sys
import tempfile
import time
import tomllib
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

#: the main computation modules and the tests that must catch their bugs (the test folders that
#: mirror them; a mutant is run against all of them, stopping at the first failure)
_CAL = ["tests/analysis/calibration"]
_STAB = ["tests/analysis/stability"]
_MOD = ["tests/analysis/models", "tests/cli/test_models_cli.py"]
_TRK = ["tests/logger/tracking"]
DEFAULT_MODULES = {
    "analysis/calibration/steps.py": _CAL,
    "analysis/calibration/curvefit.py": _CAL,
    "analysis/calibration/detection.py": _CAL,
    "analysis/calibration/rangemc.py": _CAL,
    "analysis/calibration/covariance.py": _CAL,
    "analysis/calibration/significance.py": _CAL,
    "analysis/calibration/threshold.py": _CAL,
    "analysis/calibration/classify.py": _CAL,
    "analysis/stability/allan.py": _STAB,
    "analysis/stability/allan_edf.py": _STAB,
    "analysis/stability/settling.py": _STAB,
    "analysis/stability/gls.py": _STAB,
    "analysis/stability/drift.py": _STAB,
    "analysis/stability/analyse.py": _STAB,
    "analysis/models/inductance.py": _MOD,
    "analysis/models/wire.py": _MOD,
    "analysis/models/timer555.py": _MOD,
    "analysis/models/coil.py": _MOD,
    "analysis/models/target.py": _MOD,
    "logger/tracking/estimators.py": _TRK,
    "logger/tracking/sinefit.py": _TRK,
    "logger/tracking/fundamental.py": _TRK,
    "logger/pipeline/baseline.py": ["tests/logger/pipeline"],
    "logger/pipeline/corrections.py": ["tests/logger/pipeline"],
}
#: mutants judged equivalent (no result can change), one per line:
#: ``module | source line (stripped) | mutation description | why``
EQUIVALENT_FILE = ROOT / "benchmarks" / "mutation_equivalent.txt"
PRAGMA = "# pragma: no mutate"


@dataclass(frozen=True)
class Mutant:
    """One planted bug: where it is and what it does."""

    module: str
    index: int  # position among the module's mutation sites
    line: int
    kind: str
    description: str


class _Sites(ast.NodeVisitor):
    """Collects (node path, kind, description) for every mutation site of a module."""

    def __init__(self, skip_lines: set[int]):
        self.sites: list[tuple[int, str, str]] = []  # (line, kind, description)
        self.skip = skip_lines
        self._docstrings: set[int] = set()

    def _add(self, node, kind, text):
        if getattr(node, "lineno", None) in self.skip:
            return
        self.sites.append((node.lineno, kind, text))

    def visit_Module(self, node):
        self._mark_docstrings(node)
        self.generic_visit(node)

    def _mark_docstrings(self, tree):
        for n in ast.walk(tree):
            if isinstance(n, (ast.Module, ast.FunctionDef, ast.ClassDef, ast.AsyncFunctionDef)):
                body = getattr(n, "body", [])
                if body and isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant) \
                        and isinstance(body[0].value.value, str):
                    self._docstrings.add(id(body[0].value))

    def visit_BinOp(self, node):
        swap = _BINOP_SWAP.get(type(node.op))
        if swap is not None:
            self._add(node, "binop", f"{type(node.op).__name__} -> {swap.__name__}")
        self.generic_visit(node)

    def visit_Compare(self, node):
        for op in node.ops:
            swap = _CMP_SWAP.get(type(op))
            if swap is not None:
                self._add(node, "compare", f"{type(op).__name__} -> {swap.__name__}")
        self.generic_visit(node)

    def visit_BoolOp(self, node):
        self._add(node, "boolop", f"{type(node.op).__name__} -> {'Or' if isinstance(node.op, ast.And) else 'And'}")
        self.generic_visit(node)

    def visit_UnaryOp(self, node):
        if isinstance(node.op, ast.USub) and not isinstance(node.operand, ast.Constant):
            self._add(node, "unary", "-x -> x")
        self.generic_visit(node)

    def visit_Constant(self, node):
        if id(node) in self._docstrings:
            return
        v = node.value
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            return
        self._add(node, "const", f"{v!r} -> {_mutate_number(v)!r}")

    def visit_Call(self, node):
        name = _call_name(node)
        if name in _DROPPABLE_CALLS and len(node.args) == 1 and not node.keywords:
            self._add(node, "call", f"{name}(x) -> x")
        if name in _SWAP_CALLS:
            self._add(node, "swapcall", f"{name} -> {_SWAP_CALLS[name]}")
        self.generic_visit(node)


_BINOP_SWAP = {ast.Add: ast.Sub, ast.Sub: ast.Add, ast.Mult: ast.Div, ast.Div: ast.Mult,
               ast.Pow: ast.Mult, ast.FloorDiv: ast.Div}
_CMP_SWAP = {ast.Lt: ast.LtE, ast.LtE: ast.Lt, ast.Gt: ast.GtE, ast.GtE: ast.Gt, ast.Eq: ast.NotEq,
             ast.NotEq: ast.Eq}
_DROPPABLE_CALLS = {"np.sqrt", "math.sqrt", "np.abs", "abs", "np.log", "math.log", "np.log10",
                    "math.log10", "np.exp", "math.exp", "np.median", "np.mean", "np.conj"}
#: a statistic replaced by its usual stand-in (a median taken as a mean, a max as a min, ...)
_SWAP_CALLS = {"np.median": "np.mean", "np.mean": "np.median", "np.nanmedian": "np.nanmean",
               "np.nanmean": "np.nanmedian", "np.maximum": "np.minimum", "np.minimum": "np.maximum",
               "max": "min", "min": "max", "np.max": "np.min", "np.min": "np.max"}


def _call_name(node: ast.Call) -> str:
    f = node.func
    if isinstance(f, ast.Name):
        return f.id
    if isinstance(f, ast.Attribute) and isinstance(f.value, ast.Name):
        return f"{f.value.id}.{f.attr}"
    return ""


def _mutate_number(v):
    if isinstance(v, int):
        return v + 1
    return v * 2.0 if v != 0 else 1.0


class _Apply(ast.NodeTransformer):
    """Applies the ``target``-th mutation (counted in the same order as :class:`_Sites`)."""

    def __init__(self, target: int, skip_lines: set[int], docstrings: set[int]):
        self.target = target
        self.count = -1
        self.skip = skip_lines
        self.docstrings = docstrings
        self.done = False

    def _hit(self, node) -> bool:
        if getattr(node, "lineno", None) in self.skip:
            return False
        self.count += 1
        return self.count == self.target

    def visit_BinOp(self, node):
        if type(node.op) in _BINOP_SWAP and self._hit(node):
            node.op = _BINOP_SWAP[type(node.op)]()
            self.done = True
        return self.generic_visit(node)

    def visit_Compare(self, node):
        for i, op in enumerate(node.ops):
            if type(op) in _CMP_SWAP and self._hit(node):
                node.ops[i] = _CMP_SWAP[type(op)]()
                self.done = True
        return self.generic_visit(node)

    def visit_BoolOp(self, node):
        if self._hit(node):
            node.op = ast.Or() if isinstance(node.op, ast.And) else ast.And()
            self.done = True
        return self.generic_visit(node)

    def visit_UnaryOp(self, node):
        if isinstance(node.op, ast.USub) and not isinstance(node.operand, ast.Constant) and self._hit(node):
            self.done = True
            return self.generic_visit(node.operand)
        return self.generic_visit(node)

    def visit_Constant(self, node):
        if id(node) in self.docstrings:
            return node
        v = node.value
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            return node
        if self._hit(node):
            self.done = True
            return ast.copy_location(ast.Constant(_mutate_number(v)), node)
        return node

    def visit_Call(self, node):
        name = _call_name(node)
        if name in _DROPPABLE_CALLS and len(node.args) == 1 and not node.keywords and self._hit(node):
            self.done = True
            return self.generic_visit(node.args[0])
        if name in _SWAP_CALLS and self._hit(node):
            self.done = True
            new = _SWAP_CALLS[name]
            if "." in new:
                mod, attr = new.split(".")
                node.func = ast.Attribute(value=ast.Name(id=mod, ctx=ast.Load()), attr=attr, ctx=ast.Load())
            else:
                node.func = ast.Name(id=new, ctx=ast.Load())
        return self.generic_visit(node)


def _skip_lines(src: str) -> set[int]:
    return {i for i, line in enumerate(src.splitlines(), start=1) if line.rstrip().endswith(PRAGMA)}


def mutation_sites(module: str) -> list[Mutant]:
    """Every mutation site of ``module`` (a path relative to the repository root)."""
    src = (ROOT / module).read_text()
    visitor = _Sites(_skip_lines(src))
    visitor.visit(ast.parse(src))
    return [Mutant(module, i, line, kind, text) for i, (line, kind, text) in enumerate(visitor.sites)]


def mutated_source(module: str, index: int, root: Path = ROOT) -> str:
    """The source of ``module`` with mutation ``index`` applied."""
    src = (root / module).read_text()
    tree = ast.parse(src)
    marker = _Sites(set())
    marker._mark_docstrings(tree)
    applier = _Apply(index, _skip_lines(src), marker._docstrings)
    new = applier.visit(tree)
    if not applier.done:
        raise RuntimeError(f"{module}: mutation {index} not applied")
    return ast.unparse(ast.fix_missing_locations(new))


def _scratch_copy(tmp: Path) -> Path:
    """A copy of the repository's sources and tests, importable ahead of the installed project."""
    repo = tmp / "repo"
    ignore = shutil.ignore_patterns(".git", ".venv", "__pycache__", "*.pyc", ".pytest_cache", ".hypothesis")
    shutil.copytree(ROOT, repo, ignore=ignore)
    conf = tomllib.loads((ROOT / "pyproject.toml").read_text())
    mapping = conf["tool"]["setuptools"].get("package-dir", {})
    # coilshift.<x> -> folder: link each top-level mapped folder under _import/coilshift/<x>
    pkg_root = tmp / "_import" / "coilshift"
    pkg_root.mkdir(parents=True)
    for dotted, folder in mapping.items():
        parts = dotted.split(".")
        if dotted == "coilshift":
            for item in (repo / folder).iterdir():
                os.symlink(item, pkg_root / item.name)
        elif len(parts) == 2:
            os.symlink(repo / folder, pkg_root / parts[1])
    return repo


def run_mutant(m: Mutant, repo: Path, import_dir: Path, tests: list[str], timeout_s: float) -> str:
    """'killed', 'survived' or 'timeout' for one mutant (the copy's module is restored after)."""
    path = repo / m.module
    original = path.read_text()
    try:
        path.write_text(mutated_source(m.module, m.index, repo))
        env = dict(os.environ, PYTHONPATH=str(import_dir), PYTHONDONTWRITEBYTECODE="1")
        cmd = [sys.executable, "-m", "pytest", "-x", "-q", "-p", "no:cacheprovider", "-m", "not audio", *tests]
        try:
            res = subprocess.run(cmd, cwd=repo, env=env, capture_output=True, text=True, timeout=timeout_s)
        except subprocess.TimeoutExpired:
            return "timeout"
        return "survived" if res.returncode == 0 else "killed"
    finally:
        path.write_text(original)


def _baseline_ok(repo: Path, import_dir: Path, tests: list[str], timeout_s: float) -> bool:
    env = dict(os.environ, PYTHONPATH=str(import_dir), PYTHONDONTWRITEBYTECODE="1")
    res = subprocess.run([sys.executable, "-m", "pytest", "-x", "-q", "-p", "no:cacheprovider", "-m", "not audio",
                          *tests], cwd=repo, env=env, capture_output=True, text=True, timeout=timeout_s * 4)
    return res.returncode == 0


def load_equivalent(path: Path = EQUIVALENT_FILE) -> dict[tuple[str, str, str], str]:
    """(module, stripped source line, description) -> why the mutant is equivalent."""
    out = {}
    if not path.exists():
        return out
    for raw in path.read_text().splitlines():
        if not raw.strip() or raw.lstrip().startswith("#"):
            continue
        parts = [p.strip() for p in raw.split(" | ")]
        if len(parts) != 4:
            raise SystemExit(f"{path.name}: expected 'module | line | mutation | why', got {raw!r}")
        out[tuple(parts[:3])] = parts[3]
    return out


def source_line(m: Mutant) -> str:
    return (ROOT / m.module).read_text().splitlines()[m.line - 1].strip()


def equivalence_key(m: Mutant) -> tuple[str, str, str]:
    """(module, stripped source line, mutation) as written in the equivalent-mutant file.

    When one line holds the same mutation more than once (two constants ``1`` on a line), the
    mutation is suffixed ``#k``, its 1-based place among them from the left, so one occurrence can
    be judged equivalent without hiding the others.
    """
    same = [s.index for s in mutation_sites(m.module) if s.line == m.line and s.description == m.description]
    text = m.description if len(same) == 1 else f"{m.description} #{same.index(m.index) + 1}"
    return m.module, source_line(m), text


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("modules", nargs="*", help="module paths (default: the main computation modules)")
    ap.add_argument("--max", type=int, default=0, help="at most this many mutants per module (0: all)")
    ap.add_argument("--seed", type=int, default=0, help="which mutants when --max samples them")
    ap.add_argument("--index", type=int, nargs="+", help="only these mutation sites (numbers from --list)")
    ap.add_argument("--tests", nargs="+", help="run these test paths instead of the module's default ones")
    ap.add_argument("--timeout", type=float, default=300.0, help="seconds per mutant test run")
    ap.add_argument("--list", action="store_true", help="only list the mutation sites")
    ap.add_argument("--json", metavar="FILE", help="also write every result to FILE")
    args = ap.parse_args(argv)
    modules = {m: DEFAULT_MODULES.get(m, [_mirror_tests(m)]) for m in args.modules} or DEFAULT_MODULES
    if args.tests:
        modules = {m: list(args.tests) for m in modules}
    equivalent = load_equivalent()
    rng = random.Random(args.seed)
    plan = []
    for module, tests in modules.items():
        sites = mutation_sites(module)
        if args.index:
            sites = [s for s in sites if s.index in set(args.index)]
        elif args.max and len(sites) > args.max:
            sites = sorted(rng.sample(sites, args.max), key=lambda s: s.index)
        plan += [(m, tests) for m in sites]
    if args.list:
        for m, _ in plan:
            eq = " (equivalent)" if equivalence_key(m) in equivalent else ""
            print(f"{m.module}:{m.line} [{m.index}] {m.kind}: {m.description}{eq}")
        print(f"{len(plan)} mutants")
        return 0
    results = []
    with tempfile.TemporaryDirectory(prefix="coilshift-mut-") as tmp:
        repo = _scratch_copy(Path(tmp))
        import_dir = Path(tmp) / "_import"
        for tests in {tuple(t) for t in modules.values()}:
            if not _baseline_ok(repo, import_dir, list(tests), args.timeout):
                print(f"the unmutated tests fail: {' '.join(tests)}; fix them first", file=sys.stderr)
                return 2
        t0 = time.monotonic()
        for i, (m, tests) in enumerate(plan, start=1):
            if equivalence_key(m) in equivalent:
                outcome = "equivalent"
            else:
                outcome = run_mutant(m, repo, import_dir, tests, args.timeout)
            results.append((m, outcome))
            mark = {"killed": ".", "survived": "S", "timeout": "T", "equivalent": "E"}[outcome]
            print(f"[{i}/{len(plan)}] {mark} {m.module}:{m.line} {m.kind}: {m.description}", flush=True)
        elapsed = time.monotonic() - t0
    _report(results, elapsed)
    if args.json:
        Path(args.json).write_text(json.dumps([{**vars(m), "source": source_line(m), "outcome": o}
                                               for m, o in results], indent=2))
    return 0


def _mirror_tests(module: str) -> str:
    parts = Path(module).parts
    return str(Path("tests", *parts[:-1]))


def _report(results, elapsed_s: float) -> None:
    """Per-module and total score; equivalent mutants are listed but left out of the score."""
    by_module: dict[str, list[str]] = {}
    for m, o in results:
        by_module.setdefault(m.module, []).append(o)
    print()
    print(f"{'module':<40} {'mutants':>7} {'equiv':>6} {'killed':>7} {'score':>7}")
    for module, outs in by_module.items():
        counted = [o for o in outs if o != "equivalent"]
        killed = sum(o != "survived" for o in counted)
        score = 100 * killed / len(counted) if counted else float("nan")
        print(f"{module:<40} {len(outs):>7} {len(outs) - len(counted):>6} {killed:>7} {score:>6.1f}%")
    counted = [o for _, o in results if o != "equivalent"]
    killed = sum(o != "survived" for o in counted)
    score = 100 * killed / len(counted) if counted else float("nan")
    print(f"{'all':<40} {len(results):>7} {len(results) - len(counted):>6} {killed:>7} {score:>6.1f}%"
          f"   (goal >= 95 %; {elapsed_s:.0f} s)")
    survivors = [m for m, o in results if o == "survived"]
    if survivors:
        print("\nsurvivors (kill each with a test, or explain it in benchmarks/mutation_equivalent.txt):")
        for m in survivors:
            print(f"  {m.module}:{m.line} [{m.index}] {m.kind}: {m.description}    {source_line(m)}")
        print("\nas keys for the equivalent-mutant file (module | line | mutation | why):")
        for m in survivors:
            print("  " + " | ".join(equivalence_key(m)) + " | ")


if __name__ == "__main__":
    sys.exit(main())
