"""Mutation testing of one package with mutmut: its own tests only, one scratch copy a package, kill rate and survivors printed.

    .venv/bin/python tools/mutate.py analysis           # what `make mutate PKG=analysis` runs
    .venv/bin/python tools/mutate.py netlist --jobs 2   # two mutants at a time (default 1: the machine is shared)
    .venv/bin/python tools/mutate.py probe --again      # keep earlier verdicts: test new or changed mutants, the survivors
                                                        # (not those judged equivalent in tools/mutate_equivalent.json)
                                                        # and the mutants stopped for time
    .venv/bin/python tools/mutate.py corners --sample 300   # a seeded random sample of 300 mutants, in .mutate/corners-sample:
                                                        # the kill rate with its 95 % Clopper-Pearson interval
    .venv/bin/python tools/mutate.py corners --sample 300 --again   # the same sample: the mutants not yet checked, the survivors
                                                        # and the mutants stopped for time

Each package is mutated in its own copy of the repository under .mutate/PKG (mutmut reads its settings
from the pyproject.toml of the folder it runs in, so each copy gets its own [tool.mutmut] table: which
files to mutate and which test folders to run). mutmut runs the package's tests once to learn which test
reaches which function, then runs, for each mutant, only the tests that reach the mutated function. A test that runs
far longer on a mutant than on the clean code (a wait for ever, a loop without end) is stopped by tools/mutate_watchdog.py
and the mutant counts as caught: a user's run would hang the same way.
"""

from __future__ import annotations

import argparse
import json
import os
import random
import re
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

# package -> (files mutmut mutates, the test folders that mirror them)
PACKAGES: dict[str, tuple[str | tuple[str, ...], tuple[str, ...]]] = {  # name: (what mutmut mutates, the tests it runs)
    "analysis": ("netloop/analysis/*", ("tests/analysis",)),
    "netlist": ("netloop/netlist/*", ("tests/netlist",)),
    "probe": ("netloop/probe/*", ("tests/probe",)),
    "corners": ("netloop/jobs/corners/*", ("tests/jobs/corners",)),
    # Ctrl-C during a run: what the workers ignore, what the first and second interrupt do (the whole run is
    # tests/jobs/statistics/test_interrupt_run.py, too slow for each mutant)
    "interrupt": ("netloop/jobs/corners/interrupt.py", ("tests/jobs/corners/test_interrupt.py",)),
    "statistics": ("netloop/jobs/statistics/*", ("tests/jobs/statistics",)),
    # the loop census and break choice are mostly exercised through the probe and the jobs that read them
    "graph": ("netloop/graph/*", ("tests/graph", "tests/probe", "tests/jobs/test_census.py", "tests/jobs/test_discover.py",
                                  "tests/jobs/test_splits.py")),
    # measure.py, measure_checks.py (the self-checks behind "inconclusive") and measure_pair.py
    "measure": ("netloop/jobs/measure*", ("tests/jobs/measure", "tests/jobs/test_measure_pair.py", "tests/jobs/test_kept_probes.py")),
    # the words, tables and files a verdict reaches the user in (text, JSON, CSV, JUnit XML, HTML, plots)
    "report": ("netloop/report/*", ("tests/report",)),
    # the census of loops and breaks, the comparison of break locations, the records and the results file
    "jobs": (tuple(f"netloop/jobs/{m}.py" for m in ("census", "discover", "compare", "compare_explain", "splits", "loop_result",
                                                    "document", "document_read", "kept_probes", "early")),
             tuple(f"tests/jobs/test_{m}.py" for m in ("census", "discover", "compare", "splits", "document_read", "kept_probes",
                                                         "loop_result"))),
    # results files read back: figures, axes, boundaries and map surfaces, regression limits, baselines, trends
    "runs": ("netloop/jobs/runs/*", ("tests/jobs/runs",)),
    # the commands: which exit status a verdict gives (0 only for a measurement that checked itself), the messages of bad input
    "cli": ("netloop/cli/*", ("tests/cli",)),
    # which values set the margins: the knobs, the slopes, the what-if solve
    "sensitivity": ("netloop/jobs/sensitivity/*", ("tests/jobs/sensitivity",)),
    # what ngspice is told and what is read back: the decks, sweeps, vectors, the judging of its output, the worker
    # process (whose mutants run in the worker processes the tests start: tools/sitecustomize.py)
    "sim": ("netloop/sim/*", ("tests/sim",)),
}
# what the tests read besides netloop/ and tests/ (netloop/circuits and netloop/templates are links to these; a measure test
# builds its sky130 bench with benchmarks/_sky130_regulator.py; a report test reads the caution in README.md and docs/)
COPIED = ("netloop", "tests", "circuits", "templates", "benchmarks", "docs", "README.md", "pyproject.toml")
# mutmut's verdicts (`mutmut results --all true` prints "name: verdict")
KILLED = ("killed", "timeout", "segfault")  # a timeout or crash is the tests noticing the mutant
# the verdicts of a run stopped from outside (mutmut's time limits, tools/mutate_watchdog.py): a busy machine can give them
# too, so --again tests these mutants once more
STOPPED = ("timeout", "segfault")


def _again(verdict: str) -> bool:
    """Whether --again tests a mutant with this verdict once more: a survivor, or a mutant stopped rather than failed."""
    return verdict not in KILLED or verdict in STOPPED


def _config(pattern: str | tuple[str, ...], tests: tuple[str, ...]) -> str:
    """The [tool.mutmut] table for one package."""
    lines = [
        "",
        "[tool.mutmut]",
        'source_paths = ["netloop"]',
        f"only_mutate = {json.dumps([pattern] if isinstance(pattern, str) else list(pattern))}",
        # the package data links (netloop/circuits, netloop/templates) are not walked by mutmut: copy them
        'also_copy = ["circuits", "templates", "benchmarks", "docs", "README.md", "netloop/circuits", "netloop/templates"]',
        f"pytest_add_cli_args_test_selection = {json.dumps(list(tests))}",
        # ngspice tests take seconds; a mutant that makes a test run 10x longer counts as caught
        "timeout_multiplier = 10.0",
        # each mutant is forked from a server that has only collected the tests; forked from mutmut's own process, which has
        # run the clean tests (Dask clusters, ngspice threads), a mutant inherited their locks and could hang on them
        'process_isolation = "forkserver"',
        'on_dependency_change = "rerun"',
        "use_git_change_detection = false",
    ]
    return "\n".join(lines) + "\n"


def unwrap_properties(source: str) -> tuple[str, list[str]]:
    """``source`` with each @property of a top-level class made a plain method and wrapped again at the end of the module
    (``Class.name = property(Class.name)``), and the mutmut names of those methods' mutants without their number
    (``xǁClassǁname``). mutmut 3.8.1 makes no mutant of a decorated function (but @staticmethod and @classmethod), and the
    properties hold verdicts (LoopResult.verdict, CornerRun.verdict, YieldStatistics.verdict, ...): in the scratch copy they
    become plain methods for mutmut, the same property once the module has run. The decorator line is left blank and the
    new lines come last, so no line moves. A property of a nested class, or one with a setter, is left as it is."""
    import ast

    tree = ast.parse(source)
    lines = source.split("\n")
    wrapped, names = [], []
    for cls in tree.body:
        if not isinstance(cls, ast.ClassDef):
            continue
        setters = {d.value.id for node in cls.body if isinstance(node, ast.FunctionDef) for d in node.decorator_list
                   if isinstance(d, ast.Attribute) and isinstance(d.value, ast.Name)}
        for node in cls.body:
            if (isinstance(node, ast.FunctionDef) and len(node.decorator_list) == 1 and isinstance(node.decorator_list[0], ast.Name)
                    and node.decorator_list[0].id == "property" and node.name not in setters):
                decorator = node.decorator_list[0].lineno - 1
                if lines[decorator].strip().split("#")[0].strip() != "@property":
                    continue  # the decorator shares its line with something else: left as it is
                lines[decorator] = ""
                wrapped.append(f"{cls.name}.{node.name} = property({cls.name}.{node.name})")
                names.append(f"x\u01c1{cls.name}\u01c1{node.name}")
    if not wrapped:
        return source, []
    tail = "\n".join(["", "# tools/mutate.py: the properties above, made plain methods for mutmut, wrapped again", *wrapped, ""])
    return "\n".join(lines).rstrip("\n") + "\n" + tail, names


def _unwrap_copy(work: Path) -> dict[str, list[str]]:
    """unwrap_properties on every module of the copy's netloop/; {module: mutmut names of its properties' methods}, kept in
    properties.json beside the copy."""
    found = {}
    for path in sorted((work / "netloop").rglob("*.py")):
        text, names = unwrap_properties(path.read_text())
        if names:
            stat = path.stat()
            path.write_text(text)
            os.utime(path, ns=(stat.st_atime_ns, stat.st_mtime_ns))  # mutmut sees a change only where the work tree changed
            found[".".join(path.relative_to(work).with_suffix("").parts)] = names
    (work / "properties.json").write_text(json.dumps(found, indent=1, ensure_ascii=False))
    return found


def prepare(package: str, fresh: bool, folder: str | None = None) -> Path:
    """The scratch copy .mutate/PKG (or .mutate/FOLDER), brought up to date with the work tree (file times kept, so mutmut sees what changed)."""
    pattern, tests = PACKAGES[package]
    work = ROOT / ".mutate" / (folder or package)
    if fresh and work.exists():
        shutil.rmtree(work)
    work.mkdir(parents=True, exist_ok=True)
    for name in COPIED:
        src, dst = ROOT / name, work / name
        if dst.is_dir() and not dst.is_symlink():
            shutil.rmtree(dst)
        elif dst.exists() or dst.is_symlink():
            dst.unlink()
        if src.is_dir():
            shutil.copytree(src, dst, symlinks=True, ignore=shutil.ignore_patterns("__pycache__", ".hypothesis"))
        else:
            shutil.copy2(src, dst)
    _unwrap_copy(work)
    pyproject = work / "pyproject.toml"
    pyproject.write_text(pyproject.read_text() + _config(pattern, tests))
    # the sky130 circuits reach the process models through ../../.venv from circuits/sky130 (in the copy and in mutants/)
    for folder in (work, work / "mutants"):
        folder.mkdir(exist_ok=True)
        link = folder / ".venv"
        if not link.exists():
            link.symlink_to(ROOT / ".venv")
    return work


def _mutmut(work: Path, *args: str, quiet: bool = False) -> subprocess.CompletedProcess:
    """mutmut from the shared virtualenv, run in the scratch copy, its output passed through (kept when quiet or listing results)."""
    # mutmut puts the scratch copy's mutants/ first; tools/ holds no package to shadow it, only the watchdog each test run loads
    hits = work / "child-hits"  # what worker processes reach in the stats run (tools/sitecustomize.py)
    hits.mkdir(exist_ok=True)
    env = dict(os.environ, PYTHONHASHSEED="0", PYTHONPATH=str(ROOT / "tools"), PYTEST_PLUGINS="mutate_watchdog",
               MUTATE_TEST_DURATIONS=str(work / "mutants" / "mutmut-stats.json"), MUTATE_HUNG_LOG=str(work / "hung.log"),
               MUTATE_CHILD_HITS=str(hits))
    exe = Path(sys.executable).with_name("mutmut")
    capture = quiet or args[0] == "results"
    return subprocess.run([str(exe), *args], cwd=work, env=env, text=True, capture_output=capture, check=False)


def run_mutants(work: Path, jobs: int, *names: str) -> None:
    """``mutmut run`` in the copy (every mutant without a verdict, or ``names``); stops the script when mutmut stopped before
    testing: a test that fails on the clean code or under mutmut's wrappers makes it give up after its first pass, and the
    verdicts it then lists are an earlier run's (figures printed from them would look current)."""
    done = _mutmut(work, "run", "--max-children", str(jobs), *names)
    if done.returncode != 0:
        raise SystemExit(f"mutate: mutmut stopped before testing the mutants of {work} (exit {done.returncode}; its last lines above say "
                         "why, such as a test failing on the clean code or under mutmut); no figures: the verdicts there are an earlier run's")


def mutant_names(work: Path) -> list[str]:
    """Every mutant mutmut generated in the copy, by name, sorted (read from the .meta file it writes beside each mutated file)."""
    names: set[str] = set()
    for meta in (work / "mutants").rglob("*.py.meta"):
        names.update(json.loads(meta.read_text())["exit_code_by_key"])
    return sorted(names)


def _generated(work: Path, jobs: int) -> list[str]:
    """Generate the copy's mutants and learn which tests reach what (mutmut does both before it filters by name: a name that
    matches nothing stops it right after); every mutant's name."""
    _mutmut(work, "run", "--max-children", str(jobs), "netloop.no_such_mutant", quiet=True)
    return mutant_names(work)


def property_mutants(work: Path, judged: dict[str, str], jobs: int) -> list[str]:
    """The copy's mutants of the methods that are properties in the package (properties.json, unwrap_properties), not judged
    equivalent; kept in sample.json beside the copy for --report."""
    prefixes = tuple(f"{module}.{name}__mutmut_" for module, names in json.loads((work / "properties.json").read_text()).items()
                     for name in names)
    every = _generated(work, jobs)
    chosen = [n for n in every if n.startswith(prefixes) and n not in judged]
    (work / "sample.json").write_text(json.dumps({"properties": True, "of": len(every), "names": chosen}, indent=1, ensure_ascii=False))
    return chosen


def draw_sample(work: Path, size: int, seed: int, judged: dict[str, str], jobs: int) -> list[str]:
    """Draw ``size`` of the copy's mutants (_generated) not judged equivalent, the same for the same seed and code; the draw
    is kept in sample.json beside the copy so that --report reads the same sample."""
    names = [n for n in _generated(work, jobs) if n not in judged]
    if not names:
        raise SystemExit(f"mutate: mutmut generated no mutants in {work}; run it without --sample to see why")
    chosen = sorted(random.Random(seed).sample(names, min(size, len(names))))
    (work / "sample.json").write_text(json.dumps({"seed": seed, "of": len(names), "names": chosen}, indent=1))
    return chosen


def clopper_pearson(killed: int, tested: int, level: float = 0.95) -> tuple[float, float]:
    """The exact binomial interval for a kill rate measured on a random sample (Clopper and Pearson, Biometrika 26, 1934)."""
    from scipy.stats import binomtest  # noqa: PLC0415  (only a sampled run needs scipy)

    ci = binomtest(killed, tested).proportion_ci(confidence_level=level, method="exact")
    return ci.low, ci.high


def verdicts(work: Path) -> dict[str, str]:
    """Every mutant of the copy with mutmut's verdict."""
    if not (work / "mutants").is_dir():
        raise SystemExit(f"mutate: {work} holds no mutmut run; run it first (make mutate PKG={work.name})")
    run = _mutmut(work, "results", "--all", "true")
    found = dict(m.groups() for m in re.finditer(r"^\s*(\S+): (.+?)\s*$", run.stdout, re.MULTILINE))
    if run.returncode != 0 or not found:  # never a kill rate from results mutmut could not read (say, a run cut short)
        raise SystemExit(f"mutate: mutmut could not list the mutants of {work} ({(run.stderr.strip().splitlines() or ['no mutants'])[-1]}); "
                         f"run again from scratch: make mutate PKG={work.name}")
    return found


def summary(package: str, found: dict[str, str], equivalent: dict[str, str], sample: dict | None = None) -> tuple[str, int]:
    """The kill rate over non-equivalent mutants and the survivors ("no tests" among them), as text; and the number of survivors.

    A run cut short leaves mutants "not checked": they are counted apart and the figure says the run is incomplete.
    A sampled run (``sample``, as sample.json holds it) counts its drawn mutants only, and adds the interval the sample supports.
    """
    if sample is not None:
        found = {n: v for n, v in found.items() if n in set(sample["names"])}
    # a mutant judged equivalent is not tested again (--again skips it), so "not checked" is no gap for it
    unchecked = sorted(n for n, v in found.items() if v == "not checked" and n not in equivalent)
    tested = {n: v for n, v in found.items() if v != "not checked"}
    killed = [n for n, v in tested.items() if v in KILLED]
    judged = [n for n, v in found.items() if n in equivalent and v not in KILLED]
    survived = sorted(n for n, v in tested.items() if v not in KILLED and n not in equivalent)
    counted = len(killed) + len(survived)
    rate = 100.0 * len(killed) / counted if counted else 100.0
    lines = [f"{package}: {len(killed)} of {counted} non-equivalent mutants killed ({rate:.1f} %); "
             f"{len(judged)} judged equivalent (tools/mutate_equivalent.json), {len(survived)} survived"]
    if unchecked:
        lines[0] += f"; INCOMPLETE: {len(unchecked)} of {len(found)} mutants not checked (run again with --again)"
    elif sample is not None and sample.get("properties"):
        lines[0] += f"; the mutants of the package's properties only ({len(sample['names'])} of its {sample['of']} mutants)"
    elif sample is not None and counted:
        low, high = clopper_pearson(len(killed), counted)
        lines[0] += (f"; a random sample (seed {sample['seed']}) of {len(sample['names'])} of the package's {sample['of']} "
                     f"mutants not judged equivalent: kill rate {100 * low:.1f} to {100 * high:.1f} % at 95 % confidence (Clopper-Pearson)")
    lines += [f"  survived ({tested[n]}): {n}" for n in survived]
    return "\n".join(lines), len(survived)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("packages", nargs="*", metavar="PKG", help=f"one or more of {', '.join(PACKAGES)} (default: all, one after the other)")
    parser.add_argument("--jobs", type=int, default=1, help="mutants tested at a time (default 1)")
    parser.add_argument("--again", action="store_true", help="keep the last run's verdicts: test only new or changed mutants, its survivors not judged equivalent and its mutants stopped for time")
    parser.add_argument("--report", action="store_true", help="only print the last run's figures")
    parser.add_argument("--sample", type=int, metavar="N", help="test a random sample of N mutants (in .mutate/PKG-sample) and give the kill rate's 95 %% interval")
    parser.add_argument("--seed", type=int, default=1, help="the sample's seed (default 1)")
    parser.add_argument("--properties", action="store_true", help="test only the mutants of the package's properties (in .mutate/PKG-properties): "
                        "mutmut makes none of a decorated function, so a full run made none of them before they were unwrapped")
    args = parser.parse_args(argv)
    unknown = [p for p in args.packages if p not in PACKAGES]
    if unknown:
        parser.error(f"unknown package {unknown[0]!r}; expected one of {', '.join(PACKAGES)}")
    equivalent = json.loads((ROOT / "tools" / "mutate_equivalent.json").read_text())
    for package in args.packages or list(PACKAGES):
        folder = f"{package}-sample" if args.sample else f"{package}-properties" if args.properties else package
        if args.report:
            work = ROOT / ".mutate" / folder
        elif args.sample or args.properties:  # a chosen set of mutants, kept in sample.json
            drawn = ROOT / ".mutate" / folder / "sample.json"
            judged = equivalent.get(package, {})
            if args.again and drawn.exists():  # the same set: not yet checked, survived (not judged equivalent) or stopped
                chosen = [n for n, v in verdicts(drawn.parent).items()
                          if n in set(json.loads(drawn.read_text())["names"]) and _again(v) and n not in judged]
                work = prepare(package, fresh=False, folder=folder)
            else:
                work = prepare(package, fresh=True, folder=folder)
                chosen = (property_mutants(work, judged, args.jobs) if args.properties
                          else draw_sample(work, args.sample, args.seed, judged, args.jobs))
            if chosen:
                run_mutants(work, args.jobs, *chosen)
        else:
            previous = ROOT / ".mutate" / package
            judged = equivalent.get(package, {})  # not tested again: a judged-equivalent mutant survives every test by definition
            # "not checked" mutants are tested by the first run below anyway: naming them would test them twice
            survivors = ([n for n, v in verdicts(previous).items() if _again(v) and v != "not checked" and n not in judged]
                         if args.again and (previous / "mutants").is_dir() else [])
            work = prepare(package, fresh=not args.again)
            run_mutants(work, args.jobs)  # every mutant without a verdict (all of them when fresh)
            if survivors:  # mutmut keeps a verdict unless the mutant is named: name the survivors to test them again
                run_mutants(work, args.jobs, *survivors)
        drawn = work / "sample.json"
        sample = json.loads(drawn.read_text()) if drawn.exists() else None
        text, _ = summary(package, verdicts(work), equivalent.get(package, {}), sample)
        print(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
