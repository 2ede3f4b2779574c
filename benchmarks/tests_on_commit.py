"""Run today's test files against the code of an earlier commit: does a test fail without the fix?

    python benchmarks/tests_on_commit.py 51891e7 tests/cli/test_nothing_lost.py ... \
        --also tests/cli/reliability_helpers.py --replace=--sphere=--target --json old.json

The commit's tree is exported with ``git archive`` into a temporary folder (the repository is not
touched), the named test files (and ``--also`` helpers) are copied into it, ``--replace``
rewrites option spellings that changed since, and pytest runs there with every ``coilshift.*``
module taken from that tree: a ``sitecustomize`` on ``PYTHONPATH`` puts a finder ahead of the
editable install, in this process and in every command the tests start. A test that blocks (a
named pipe opened by old code) is stopped after ``--limit-s`` by SIGALRM. Prints one line per
test (``pass``/``fail``/``error``/``skip``) and, with ``--json``, writes them to a file.
docs/reliability.md section 9 was made this way (51891e7: the code before round two).
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import xml.etree.ElementTree as ET
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

SITECUSTOMIZE = '''
import os, sys, types
from importlib.machinery import PathFinder
TREE = os.environ["COILSHIFT_TREE"]
class _Tree:
    @classmethod
    def find_spec(cls, fullname, path=None, target=None):
        if not fullname.startswith("coilshift."):
            return None
        parent = fullname.rpartition(".")[0]
        search = [TREE] if parent == "coilshift" else list(sys.modules[parent].__path__)
        spec = PathFinder.find_spec(fullname, search)
        if spec is None:  # never fall through to today's code
            raise ModuleNotFoundError(f"No module named {fullname!r} in {TREE}", name=fullname)
        return spec
pkg = types.ModuleType("coilshift")
pkg.__path__ = [TREE]
sys.modules["coilshift"] = pkg
sys.meta_path.insert(0, _Tree)
'''

ALARM_PLUGIN = '''
import os, signal
import pytest
LIMIT_S = int(os.environ.get("COILSHIFT_TEST_LIMIT_S", "150"))
class Hung(Exception):
    pass
def _raise(signum, frame):
    raise Hung(f"hung: no answer within {LIMIT_S} s")
@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_call(item):
    old = signal.signal(signal.SIGALRM, _raise)
    signal.alarm(LIMIT_S)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
'''


def results(junit: Path) -> dict[str, str]:
    """test id -> pass / fail / error / skip, from a JUnit XML file."""
    out = {}
    for case in ET.parse(junit).getroot().iter("testcase"):
        name = f"{case.get('classname', '')}::{case.get('name')}"
        kinds = [c.tag for c in case if c.tag in ("failure", "error", "skipped")]
        out[name] = {"failure": "fail", "error": "error", "skipped": "skip"}.get(kinds[0], "pass") if kinds else "pass"
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("commit")
    ap.add_argument("tests", nargs="+", help="test files (paths in the repository)")
    ap.add_argument("--also", nargs="*", default=[], help="helper files to copy as well")
    ap.add_argument("--replace", action="append", default=[], metavar="OLD=NEW",
                    help="text to rewrite in the copied tests (an option renamed since)")
    ap.add_argument("--limit-s", type=int, default=150, help="seconds before a blocked test is stopped")
    ap.add_argument("--json", type=Path, help="write the results here")
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="coilshift-at-") as tmp:
        tree, site = Path(tmp) / "tree", Path(tmp) / "site"
        tree.mkdir()
        site.mkdir()
        archive = subprocess.run(["git", "-C", str(ROOT), "archive", args.commit], capture_output=True, check=True)
        subprocess.run(["tar", "-x", "-C", str(tree)], input=archive.stdout, check=True)
        for rel in [*args.tests, *args.also]:
            text = (ROOT / rel).read_text()
            for pair in args.replace:
                old, new = pair.split("=", 1)
                text = text.replace(f'"{old}"', f'"{new}"')
            (tree / rel).parent.mkdir(parents=True, exist_ok=True)
            (tree / rel).write_text(text)
        (site / "sitecustomize.py").write_text(SITECUSTOMIZE)
        (site / "coilshift_alarm.py").write_text(ALARM_PLUGIN)
        junit = Path(tmp) / "junit.xml"
        env = {**os.environ, "COILSHIFT_TREE": str(tree), "PYTHONPATH": str(site),
               "COILSHIFT_TEST_LIMIT_S": str(args.limit_s)}
        env.pop("COILSHIFT_DEBUG", None)
        subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", "-p", "coilshift_alarm",
                        "--continue-on-collection-errors", f"--junitxml={junit}", *args.tests], cwd=tree, env=env)
        found = results(junit) if junit.exists() else {}
    for name, kind in sorted(found.items()):
        print(f"{kind:5s} {name}")
    if args.json:
        args.json.write_text(json.dumps(found, indent=1) + "\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
