"""Mutation testing of the core modules: how many small code changes the tests catch.

Not part of the test run; a standing measure. For each module it copies the project's
tracked files to a temporary folder (the working tree is never mutated), lets cosmic-ray
(``pip install -e ".[mutation]"``) make every mutant of that module, runs the module's
tests on each, and prints the share of mutants killed, with the survivors.

    .venv/bin/python benchmarks/mutation.py                 # every module below
    .venv/bin/python benchmarks/mutation.py verify diagnose # some of them
    .venv/bin/python benchmarks/mutation.py --list          # the modules and their tests
    .venv/bin/python benchmarks/mutation.py --retest old.json --json new.json
                                       # after adding tests: re-run the survivors only

A survivor is a change no test noticed: either a missing test or an equivalent mutant
(same behaviour); the README lists those judged harmless.
"""

from __future__ import annotations

import argparse
import ast
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

#: name -> (module, the tests that guard it, the functions mutated: () for the whole module).
#: Tests are kept fast: each mutant runs them once.
MODULES = {
    "verify": ("districting/verify.py", "tests/test_verify.py -k 'not command'", ()),
    "precheck": ("districting/engine/precheck.py",
                 "tests/engine/test_diagnose.py tests/test_years.py -k 'not explain'",
                 ("reachable", "unbuildable", "precheck", "_count_issues", "_lock_pair_issues",
                  "_no_school_issues", "_root_pair_issues", "_must_move",
                  "_forced_move_issues", "_seats", "_year_capacity_issues",
                  "_shared_root_issues", "_floor_issues", "_lock_reach_issues",
                  "_island_issues")),
    "bands": ("districting/plan.py", "tests/test_years.py -k 'flag'", ("out_of_band",)),
    "connectivity": ("districting/engine/connectivity.py", "tests/engine/test_connectivity.py",
                     ("zone_components", "main_labels", "attached_mask", "fragments",
                      "is_contiguous", "plan_checks")),
    "cuts": ("districting/engine/cuts.py", "tests/engine/test_cuts.py",
             ("separator", "min_separator", "_vertex_cut", "separator_cuts",
              "fractional_cuts")),
    "option-names": ("districting/names.py", "tests/test_names.py", ()),
}
TIMEOUT = 120.0  # seconds per mutant's test run (a mutant that loops forever is killed)


def copy_project(dest: Path) -> None:
    files = subprocess.run(["git", "ls-files", "-co", "--exclude-standard"], cwd=ROOT,
                           check=True, capture_output=True, text=True).stdout.split()
    for rel in files:
        src = ROOT / rel
        if src.is_file():
            (dest / rel).parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(src, dest / rel)


def line_ranges(source: Path, functions: tuple[str, ...]) -> list[str]:
    """'first-last' line ranges of the named top-level functions of ``source``."""
    tree = ast.parse(source.read_text())
    found = {node.name: f"{node.lineno}-{node.end_lineno}" for node in tree.body
             if isinstance(node, ast.FunctionDef)}
    missing = [f for f in functions if f not in found]
    if missing:
        raise SystemExit(f"{source}: no top-level function(s) {missing}")
    return [found[f] for f in functions]


def run_module(name: str, keep: bool = False) -> dict:
    path, tests, functions = MODULES[name]
    work = Path(tempfile.mkdtemp(prefix=f"mutation-{name}-"))
    copy_project(work)
    py = sys.executable
    command = f"{py} -m pytest -x -q -p no:cacheprovider -o addopts='' {tests}"
    config = work / "mutation.toml"
    config.write_text(
        "[cosmic-ray]\n"
        f'module-path = "{path}"\n'
        f"timeout = {TIMEOUT}\n"
        "excluded-modules = []\n"
        f'test-command = "{command}"\n'
        "[cosmic-ray.distributor]\n"
        'name = "local"\n'
    )
    if functions:
        ranges = ", ".join(f'"{r}"' for r in line_ranges(work / path, functions))
        with config.open("a") as fh:
            fh.write(f'[cosmic-ray.filters.line-filter]\nlines = {{ "{path}" = [{ranges}] }}\n')
    env = {**os.environ, "PYTHONPATH": str(work)}
    bin_dir = Path(py).parent
    cr = [str(bin_dir / "cosmic-ray")]
    session = work / "session.sqlite"
    started = time.perf_counter()
    subprocess.run(cr + ["init", str(config), str(session)], cwd=work, env=env, check=True)
    # lines marked "# pragma: no mutate" are left alone
    subprocess.run([str(bin_dir / "cr-filter-pragma"), str(session)],
                   cwd=work, env=env, check=True)
    if functions:  # only the named functions
        subprocess.run([str(bin_dir / "cr-filter-lines"), "--config", str(config), str(session)],
                       cwd=work, env=env, check=True)
    base = subprocess.run(cr + ["baseline", str(config)], cwd=work, env=env)
    if base.returncode != 0:
        raise SystemExit(f"{name}: the tests fail without any mutant; fix them first")
    subprocess.run(cr + ["exec", str(config), str(session)], cwd=work, env=env, check=True)
    dump = subprocess.run(cr + ["dump", str(session)], cwd=work, env=env, check=True,
                          capture_output=True, text=True).stdout
    killed, survived, skipped = 0, [], 0
    for line in dump.splitlines():
        job, result = json.loads(line)
        if result is None or result.get("worker_outcome") == "skipped":
            skipped += 1
            continue
        if result.get("test_outcome") == "survived":
            mut = job["mutations"][0]
            survived.append(f"{mut['module_path']}:{mut['start_pos'][0]} {mut['operator_name']}"
                            f" #{mut['occurrence']}")
        else:
            killed += 1
    total = killed + len(survived)
    if not keep:
        shutil.rmtree(work, ignore_errors=True)
    return {"module": name, "mutants": total, "killed": killed, "survived": survived,
            "skipped": skipped, "score": killed / total if total else 1.0,
            "seconds": time.perf_counter() - started}


def retest(results: list[dict]) -> list[dict]:
    """Run today's tests on the survivors of an earlier run (its --json file) only.

    Mutants that were killed stay killed as long as tests are only added; a survivor that
    the new tests kill counts as killed.
    """
    py = sys.executable
    out = []
    for res in results:
        path, tests, _ = MODULES[res["module"]]
        work = Path(tempfile.mkdtemp(prefix=f"mutation-{res['module']}-"))
        copy_project(work)
        pristine = (work / path).read_bytes()
        env = {**os.environ, "PYTHONPATH": str(work)}
        still = []
        for s in res["survived"]:
            where, operator, occurrence = s.split(" ")
            subprocess.run([str(Path(py).parent / "cosmic-ray"), "apply", path, operator,
                            occurrence.lstrip("#")], cwd=work, env=env, check=True,
                           capture_output=True)
            run = subprocess.run(f"{py} -m pytest -x -q -p no:cacheprovider -o addopts='' "
                                 f"{tests}", shell=True, cwd=work, env=env,
                                 capture_output=True, timeout=TIMEOUT)
            (work / path).write_bytes(pristine)
            if run.returncode == 0:
                still.append(s)
        shutil.rmtree(work, ignore_errors=True)
        killed = res["mutants"] - len(still)
        out.append({**res, "killed": killed, "survived": still,
                    "score": killed / res["mutants"] if res["mutants"] else 1.0})
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("modules", nargs="*", help=f"some of: {', '.join(MODULES)}")
    ap.add_argument("--list", action="store_true", help="print modules and their tests")
    ap.add_argument("--keep", action="store_true", help="keep the mutated copies' folders")
    ap.add_argument("--json", help="also write the results to this file")
    ap.add_argument("--retest", metavar="JSON",
                    help="run today's tests on the survivors of an earlier --json file only")
    args = ap.parse_args(argv)
    if args.list:
        for name, (path, tests, functions) in MODULES.items():
            scope = ", ".join(functions) if functions else "whole module"
            print(f"{name:14} {path:28} {tests}\n{'':14} mutated: {scope}")
        return 0
    if args.retest:
        results = retest(json.loads(Path(args.retest).read_text()))
        report(results, args.json)
        return 0
    names = args.modules or list(MODULES)
    unknown = [n for n in names if n not in MODULES]
    if unknown:
        ap.error(f"unknown module(s) {unknown}; choose from {', '.join(MODULES)}")
    results = []
    for name in names:
        res = run_module(name, keep=args.keep)
        results.append(res)
        print(f"{name}: {res['killed']}/{res['mutants']} killed "
              f"({100 * res['score']:.1f}%) in {res['seconds'] / 60:.1f} min", flush=True)
    report(results, args.json)
    return 0


def report(results: list[dict], json_path: str | None) -> None:
    for r in results:
        for s in r["survived"]:
            print(f"{r['module']}: survived: {s}")
    print(f"\n{'module':14} {'mutants':>8} {'killed':>8} {'score':>7}")
    for r in results:
        print(f"{r['module']:14} {r['mutants']:8d} {r['killed']:8d} {100 * r['score']:6.1f}%")
    if json_path:
        Path(json_path).write_text(json.dumps(results, indent=1))


if __name__ == "__main__":
    raise SystemExit(main())
