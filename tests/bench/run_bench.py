"""Speed and scale benchmark: the engine against what an engineer would otherwise use.

    python tests/bench/run_bench.py                       # N = 10 000, 100 000, 1 000 000
    python tests/bench/run_bench.py --sizes 10000 --repeat 3

For each size an invented library is generated (selector.synth) into a scratch folder
and every figure is measured in this run: medians over ``--repeat`` runs (the slow
baselines and the 1 000 000-row case run fewer times, as printed), with the ratio and
its target beside it.  Equivalence is asserted as it goes (identical qualifying sets
and order, identical counts); a difference is printed as DIFFERENT and the script
exits with status 1.  No figure here is a unit test: tests/test_bench_equivalence.py
runs the same equivalence checks at a small N.
"""
from __future__ import annotations

import argparse
import gc
import json
import math
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent.parent
sys.path.insert(0, str(HERE))

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

import bench_reference as reference  # noqa: E402
import bench_sql  # noqa: E402
from selector import derive, load_brief, load_library, shortlist  # noqa: E402
from selector import synth  # noqa: E402
from selector.checks import REGISTRY  # noqa: E402

BRIEFS = ROOT / "demo" / "briefs"
ROW_REFERENCE_MAX = 100_000  # the per-row loop is run up to this size (else projected)
LOOP_GRID_MAX = 100_000  # the per-profile shortlist loop likewise
NEAR_DUPLICATE_MAX = 100_000


class Table:
    """Rows of (size, measure, engine, baseline, ratio, target, verdict)."""

    def __init__(self):
        self.rows: list[tuple[str, ...]] = []
        self.notes: list[str] = []
        self.failed = False

    def add(self, size, measure, engine="", baseline="", ratio="", target="", verdict=""):
        self.rows.append((f"{size:,}" if isinstance(size, int) else str(size), measure,
                          engine, baseline, ratio, target, verdict))
        print(" | ".join(self.rows[-1]), flush=True)

    def note(self, text: str):
        self.notes.append(text)
        print(f"  note: {text}", flush=True)

    def render(self) -> str:
        head = ("rows", "measure", "engine", "baseline", "ratio", "target", "met")
        widths = [max(len(r[i]) for r in self.rows + [head]) for i in range(len(head))]
        line = lambda r: "  ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip()  # noqa: E731
        out = [line(head), line(tuple("-" * w for w in widths))]
        out += [line(r) for r in self.rows]
        if self.notes:
            out += [""] + [f"* {n}" for n in self.notes]
        return "\n".join(out)


def median_time(function, repeat: int) -> tuple[float, object]:
    """Median wall time (s) of ``repeat`` calls, and the last result."""
    times, result = [], None
    for _ in range(max(1, repeat)):
        gc.collect()
        start = time.perf_counter()
        result = function()
        times.append(time.perf_counter() - start)
    return statistics.median(times), result


def seconds(value: float) -> str:
    if value >= 1:
        return f"{value:.2f} s"
    return f"{value * 1e3:.1f} ms" if value >= 1e-3 else f"{value * 1e6:.0f} µs"


def verdict(ok: bool | None) -> str:
    return "—" if ok is None else ("yes" if ok else "NO")


# ------------------------------------------------------------------ sections
def bench_load(t: Table, n: int, path: Path, repeat: int):
    reader, _ = median_time(lambda: pd.read_csv(path), repeat)
    loader, library = median_time(lambda: load_library(path), repeat)
    ratio = loader / reader
    t.add(n, "load (read, parse units, validate) vs pandas.read_csv", seconds(loader),
          seconds(reader), f"{ratio:.2f}×", "≤ 3× at 100k",
          verdict(ratio <= 3) if n == 100_000 else "")
    return library


def _equal_order(engine, rows) -> bool:
    return list(engine.qualifying["part"]) == list(rows["part"])


def bench_shortlist(t: Table, n: int, library, req, repeat: int, rates: dict):
    engine_time, result = median_time(lambda: shortlist(req, library), repeat)
    t.add(n, f"shortlist '{req.name}' (all checks, ranked): "
          f"{result.counts['qualifying']} qualify", seconds(engine_time))

    # (a) the per-row Python reference
    if n <= ROW_REFERENCE_MAX:
        start = time.perf_counter()
        rows = reference.shortlist_rows(req, library)
        row_time = time.perf_counter() - start
        rates["row"] = row_time / n
        same = _equal_order(result, rows)
        t.failed |= not same
        ratio = row_time / engine_time
        t.add(n, "  (a) per-row Python loop (brentq per part), 1 run: "
              + ("identical set and order" if same else "DIFFERENT"),
              seconds(engine_time), seconds(row_time), f"{ratio:.0f}× faster",
              "≥ 30× at 100k", verdict(ratio >= 30 and same) if n == 100_000 else "")
    else:
        projected = rates.get("row", math.nan) * n
        t.add(n, "  (a) per-row Python loop: not run at this size", seconds(engine_time),
              f"~{seconds(projected)} projected" if math.isfinite(projected) else "")

    # engine restricted to the closed-form checks, for (b), (c), (d)
    closed_time, mask = median_time(lambda: reference.engine_qualifying(req, library), repeat)
    engine_set = set(library.table["part"].to_numpy()[mask])
    t.add(n, f"  engine, closed-form checks only (no phase margin): {len(engine_set)} pass",
          seconds(closed_time))

    frame = bench_sql.parts_frame(library)
    start = time.perf_counter()
    connection = bench_sql.sqlite_database(frame)
    t.note(f"{n:,} rows: sqlite3 table built in {seconds(time.perf_counter() - start)} "
           "(not timed in the comparison)")
    sqlite_time, found = median_time(lambda: bench_sql.sqlite_qualifying(connection, req),
                                     repeat)
    same = set(found) == engine_set
    t.failed |= not same
    ratio = sqlite_time / closed_time
    t.add(n, "  (b) one SQL query, in-memory sqlite3: "
          + ("identical set" if same else "DIFFERENT"), seconds(closed_time),
          seconds(sqlite_time), f"{ratio:.1f}× faster", "faster (> 1×)",
          verdict(ratio > 1 and same))
    connection.close()

    duck = bench_sql.duckdb_database(frame)
    if duck is None:
        t.add(n, "  (c) DuckDB: not installed (pip install -e '.[bench]')")
    else:
        duck_time, found = median_time(lambda: bench_sql.duckdb_qualifying(duck, req), repeat)
        same = set(found) == engine_set
        t.failed |= not same
        ratio = duck_time / closed_time
        t.add(n, "  (c) the same query in DuckDB: " + ("identical set" if same else "DIFFERENT"),
              seconds(closed_time), seconds(duck_time), f"{ratio:.2f}×",
              "no slower (≥ 1×)", verdict(ratio >= 1 and same))
        duck.close()

    # (d) scan floor: numpy reading every column the checks read, once
    columns = sorted({c for spec in REGISTRY.values() for c in spec.columns
                      if c in library.table and library.table[c].dtype.kind == "f"})
    arrays = [library.table[c].to_numpy() for c in columns]
    floor, _ = median_time(lambda: sum(float(np.add.reduce(a)) for a in arrays),
                           max(repeat, 5))
    t.add(n, f"  (d) scan floor: numpy sum of the {len(columns)} columns the checks read",
          seconds(engine_time), seconds(floor), f"{engine_time / floor:.0f}×", "≤ 10×",
          verdict(engine_time / floor <= 10))
    t.add(n, "      closed-form checks only, against the same floor", seconds(closed_time),
          seconds(floor), f"{closed_time / floor:.0f}×", "(for information)")


def _coverage_module():
    """selector.audit's (or selector.coverage's) coverage_grid and standard
    requirements, or None while that work has not landed."""
    for name in ("selector.coverage", "selector.audit"):
        try:
            module = __import__(name, fromlist=["coverage_grid"])
        except ImportError:
            continue
        if hasattr(module, "coverage_grid"):
            return module
    return None


def bench_grid(t: Table, n: int, library, repeat: int):
    module = _coverage_module()
    if module is None:
        t.add(n, "audit grid: selector.audit.coverage_grid not available yet: skipped")
        return
    if hasattr(module, "standard_requirements"):
        requirements = list(module.standard_requirements())
    else:
        requirements = [derive(b) for b in module.standard_profiles()]
    grid_time, grid = median_time(lambda: module.coverage_grid(library, requirements),
                                  max(1, repeat // 2))
    label = f"audit grid: {len(requirements)} profiles × parts, vectorised"
    if n > LOOP_GRID_MAX:
        t.add(n, label + " (loop not run at this size)", seconds(grid_time))
        return
    start = time.perf_counter()
    counts = [shortlist(req, library).counts["qualifying"] for req in requirements]
    loop_time = time.perf_counter() - start
    same = list(grid["qualifying"]) == counts
    t.failed |= not same
    ratio = loop_time / grid_time
    t.add(n, label + " vs a shortlist per profile: "
          + ("identical counts" if same else "DIFFERENT"), seconds(grid_time),
          seconds(loop_time), f"{ratio:.0f}× faster", "≥ 20× at 100k",
          verdict(ratio >= 20 and same) if n == 100_000 else "")


def bench_near_duplicates(t: Table, n: int, library, planted: pd.DataFrame):
    try:
        from selector.audit import near_duplicates
    except ImportError:
        t.add(n, "near-duplicates: selector.audit.near_duplicates not available yet: skipped")
        return
    start = time.perf_counter()
    found = near_duplicates(library)
    elapsed = time.perf_counter() - start
    pairs = set(zip(found["part_a"], found["part_b"]))
    pairs |= {(b, a) for a, b in pairs}
    hits = sum((a, b) in pairs for a, b in zip(planted["key_a"], planted["key_b"]))
    recall = hits / len(planted) if len(planted) else math.nan
    compared = found.attrs.get("pairs_compared", math.nan)
    all_pairs = n * (n - 1) / 2
    t.add(n, f"near-duplicates: time for {n:,} keys ({len(found)} pairs reported)",
          seconds(elapsed), "", "", "≤ 10 s at 100k",
          verdict(elapsed <= 10) if n == 100_000 else "")
    t.add(n, f"  recall of the {len(planted)} planted near-duplicates", f"{recall:.1%}",
          "", "", "≥ 99 %", verdict(recall >= 0.99))
    t.add(n, "  key pairs compared (of N²/2 possible)", f"{compared:,}",
          f"{all_pairs:,.0f}", f"{compared / all_pairs:.2e}", "far below N²/2",
          verdict(compared < all_pairs / 1000))


def _command(*arguments) -> list[str]:
    return [sys.executable, *arguments]


def bench_startup(t: Table, repeat: int):
    brief = str(BRIEFS / "vibration.toml")
    script = Path(sys.executable).parent / "selector"
    command = ([str(script)] if script.exists() else _command("-m", "selector"))
    command += ["shortlist", brief, "--no-color"]

    def run(arguments):
        start = time.perf_counter()
        subprocess.run(arguments, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                       cwd=ROOT, check=False)
        return time.perf_counter() - start

    run(command)  # warm the file cache
    tool = statistics.median(run(command) for _ in range(max(repeat, 5)))
    bare = statistics.median(run(_command("-c", "import pandas")) for _ in range(max(repeat, 5)))
    ratio = tool / bare
    t.add("demo", "start-up: `selector shortlist` on the demo library vs "
          "`python -c \"import pandas\"`", seconds(tool), seconds(bare), f"{ratio:.2f}×",
          "≤ 2×", verdict(ratio <= 2))
    heavy = _heavy_imports(command)
    t.note("modules imported by `selector shortlist` among matplotlib, scipy, schemdraw, "
           f"control, duckdb: {', '.join(heavy) if heavy else 'none'}")


def _heavy_imports(command) -> list[str]:
    result = subprocess.run([sys.executable, "-X", "importtime", *command[1:]]
                            if command[0] == sys.executable else
                            [sys.executable, "-X", "importtime", "-m", "selector", *command[1:]],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True,
                            cwd=ROOT, check=False)
    names = {line.rsplit("|", 1)[-1].strip().split(".")[0]
             for line in result.stderr.splitlines() if line.startswith("import time:")}
    return sorted(names & {"matplotlib", "scipy", "schemdraw", "control", "duckdb"})


# VmHWM (the peak RSS of this process image) rather than getrusage's ru_maxrss, which
# Linux carries over from the forking parent across exec.
MEMORY_PROBE = r"""
import json, sys, time
def rss(field="VmRSS:"):
    for line in open("/proc/self/status"):
        if line.startswith(field):
            return int(line.split()[1]) * 1024
from selector import derive, load_brief, load_library, shortlist
after_import = rss()
start = time.perf_counter()
library = load_library(sys.argv[1])
loaded = time.perf_counter() - start
start = time.perf_counter()
result = shortlist(derive(load_brief(sys.argv[2])), library)
ranked = time.perf_counter() - start
print(json.dumps({"peak": rss("VmHWM:"),
                  "after_import": after_import, "load": loaded, "shortlist": ranked,
                  "table": int(library.table.memory_usage(deep=True).sum()),
                  "numeric": int(library.table.select_dtypes("number")
                                 .memory_usage(deep=True).sum())}))
"""


def bench_memory(t: Table, n: int, path: Path, brief: Path):
    result = subprocess.run(_command("-c", MEMORY_PROBE, str(path), str(brief)),
                            capture_output=True, text=True, cwd=ROOT, check=False)
    if result.returncode != 0:
        t.add(n, "memory: the probe failed: " + result.stderr.strip().splitlines()[-1])
        return
    figures = json.loads(result.stdout)
    mib = lambda b: f"{b / 2 ** 20:,.0f} MiB"  # noqa: E731
    t.add(n, f"memory: peak RSS of load + shortlist in a fresh process (file "
          f"{mib(path.stat().st_size)}; imports alone {mib(figures['after_import'])})",
          mib(figures["peak"]), f"table {mib(figures['table'])}",
          f"{figures['peak'] / figures['table']:.1f}× table", "(reported)")
    t.add(n, f"  of the parsed table, numeric columns: {mib(figures['numeric'])}; "
          f"cold load {seconds(figures['load'])}, shortlist {seconds(figures['shortlist'])}")


# ------------------------------------------------------------------ main
def build_library(n: int, seed: int, folder: Path) -> tuple[Path, pd.DataFrame]:
    path = folder / f"bench-{n}.csv"
    start = time.perf_counter()
    generated = synth.generate(n, seed)
    generated.to_csv(path)
    print(f"[{n:,} rows: generated in {seconds(time.perf_counter() - start)}, "
          f"{path.stat().st_size / 2 ** 20:,.0f} MiB]", flush=True)
    return path, generated.planted


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--sizes", default="10000,100000,1000000",
                        help="comma-separated library sizes (default 10000,100000,1000000)")
    parser.add_argument("--repeat", type=int, default=5,
                        help="runs per timed figure, median reported (default 5; "
                             "at most 2 above 100 000 rows)")
    parser.add_argument("--brief", default="hydrophone",
                        help="demo brief for the shortlist (default hydrophone)")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--workdir", default=None,
                        help="folder for the generated libraries (default: a temporary one)")
    parser.add_argument("--keep", action="store_true", help="keep the generated files")
    args = parser.parse_args(argv)
    sizes = [int(s.replace("_", "")) for s in args.sizes.split(",") if s]
    folder = Path(args.workdir or tempfile.mkdtemp(prefix="selector-bench-"))
    folder.mkdir(parents=True, exist_ok=True)
    brief_path = BRIEFS / f"{args.brief}.toml"
    req = derive(load_brief(brief_path))
    table = Table()
    print(f"selector benchmark: {os.cpu_count()} CPUs, Python {sys.version.split()[0]}, "
          f"pandas {pd.__version__}, numpy {np.__version__}; brief {brief_path.name}",
          flush=True)
    started = time.perf_counter()
    try:
        bench_startup(table, args.repeat)
        rates: dict = {}
        for n in sizes:
            repeat = args.repeat if n <= 100_000 else min(args.repeat, 2)
            path, planted = build_library(n, args.seed, folder)
            library = bench_load(table, n, path, repeat)
            bench_shortlist(table, n, library, req, repeat, rates)
            bench_grid(table, n, library, repeat)
            if n <= NEAR_DUPLICATE_MAX:
                bench_near_duplicates(table, n, library, planted)
            del library
            gc.collect()
            bench_memory(table, n, path, brief_path)
            if not args.keep:
                path.unlink()
    finally:
        if not args.keep and args.workdir is None:
            shutil.rmtree(folder, ignore_errors=True)
    table.note("the SQL versions implement the closed-form checks (supply, slew, gain "
               "accuracy, swing, common mode, DC error, noise, temperature, quiescent "
               "current, output drive, status/package/cost filters) and leave out the "
               "loop-gain phase margin; they are compared with the engine run on the same "
               "checks only")
    table.note(f"medians of {args.repeat} runs (at most 2 above 100 000 rows); the "
               "per-row loop and the per-profile loop run once; total bench time "
               f"{seconds(time.perf_counter() - started)}")
    print("\n" + table.render())
    if table.failed:
        print("\nbench: an equivalence check FAILED (see DIFFERENT above)", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
