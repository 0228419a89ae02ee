"""Benchmark: size of front.html and its time until interactive in headless Chromium, for a
20 000-design front (targets: <= 5 MB and <= 3 s).

Prints one JSON object (not a pytest test). Run from the repository root, on a quiet machine:

    nice -n 10 python tests/benchmarks/bench_front_page.py [--designs 20000] [--folder DIR]
        [--code ROOT]

1. Makes (or reuses, with --folder) a run folder whose front holds `--designs` distinct feasible
   designs of the demo catalogs and boat (`make_front`), set as the archive and saved (front.csv,
   front.npz, checkpoint) by the run itself. They are not mutually non-dominated: the page's work
   and size depend on the number of designs, not on their dominance.
2. Times `python -m optimiser front FOLDER` run with the code in `--code` (default: this
   repository; give an extracted copy of an older commit to measure "before").
3. Opens front.html in headless Chromium (network off) and times from navigation until the page's
   script sets `window.afpmReady` (plots drawn, clicks answered): the best of three loads.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from optimiser.search.run import Budget, SearchRun, create_run, run_search  # noqa: E402


def make_front(folder: Path, n_designs: int, seed: int = 0) -> Path:
    """A run folder whose archive is `n_designs` distinct feasible designs.

    Uniformly random designs are about 0.1 % feasible, so: a short real search (3000 designs)
    gives feasible seeds, and every seed is tried with every turns count the scenario allows
    (designs near a feasible one mostly are feasible too), evaluated through the run's own cache.
    """
    if (folder / "front.csv").is_file():
        return folder
    run_dir = create_run(folder, None, ROOT / "catalogs", seed=seed, population=100,
                         budget=Budget(evaluations=3000))
    run = SearchRun(run_dir)
    run_search(run)
    problem = run.state.problem
    sc = run.scenario
    rng = np.random.default_rng(seed)
    n = len(problem.cache)
    feasible = np.flatnonzero(problem.cache.G[:n, 0] <= 0)
    turns = np.arange(sc.turns_min, sc.turns_max + 1)
    TURNS = 7  # column of turns in DesignBatch.as_matrix
    tried = 0
    while len(feasible) < n_designs and tried < len(feasible):
        base = problem.cache.designs(feasible[tried:tried + 50])
        tried += len(base)
        candidates = np.repeat(base, len(turns), axis=0)
        candidates[:, TURNS] = np.tile(turns, len(base))
        for chunk in np.array_split(candidates, max(1, len(candidates) // 20_000)):
            problem.cache.lookup(chunk, problem.evaluate_new)
        n = len(problem.cache)
        feasible = np.flatnonzero(problem.cache.G[:n, 0] <= 0)
    if len(feasible) < n_designs:
        raise SystemExit(f"only {len(feasible)} feasible designs found")
    run.state.archive = np.sort(rng.choice(feasible, n_designs, replace=False))
    run.state.feasible = len(feasible)
    problem.cache.keep_values(run.state.archive)
    run.save("finished", force=True)
    return run_dir


def load_time(page: Path, repeats: int = 3) -> dict:
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    profile = tempfile.mkdtemp(prefix="afpm-bench-")
    options = webdriver.ChromeOptions()
    options.binary_location = shutil.which("chromium") or "/usr/bin/chromium"
    for flag in ("--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
                 "--disable-background-networking", f"--user-data-dir={profile}",
                 "--host-resolver-rules=MAP * ~NOTFOUND", "--proxy-server=127.0.0.1:9",
                 "--window-size=1400,1000"):
        options.add_argument(flag)
    driver = webdriver.Chrome(service=Service(shutil.which("chromedriver") or "/usr/bin/chromedriver"),
                              options=options)
    driver.set_page_load_timeout(300)
    times = []
    try:
        for _ in range(repeats):
            driver.get("about:blank")
            t0 = time.perf_counter()
            driver.get(page.resolve().as_uri())
            while not driver.execute_script("return window.afpmReady === true"):
                if time.perf_counter() - t0 > 300:
                    raise TimeoutError("page never became ready")
                time.sleep(0.02)
            times.append(time.perf_counter() - t0)
        points = driver.execute_script(
            "return document.querySelectorAll('#scatter .scatterlayer .trace:first-child .point').length")
    finally:
        driver.quit()
        shutil.rmtree(profile, ignore_errors=True)
    return {"best_s": round(min(times), 3), "all_s": [round(t, 3) for t in times], "points_drawn": points}


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--designs", type=int, default=20_000)
    parser.add_argument("--folder", type=Path, default=None, help="run folder to make or reuse")
    parser.add_argument("--code", type=Path, default=ROOT, help="repository whose afpm draws the page")
    args = parser.parse_args()
    folder = args.folder or Path(tempfile.mkdtemp(prefix="afpm-front-bench-")) / "run"
    t0 = time.perf_counter()
    make_front(folder, args.designs)
    made_s = time.perf_counter() - t0
    page = folder / "front.html"
    page.unlink(missing_ok=True)
    t0, c0 = time.perf_counter(), os.times()
    proc = subprocess.run([sys.executable, "-m", "optimiser", "front", str(folder)], cwd=args.code,
                          capture_output=True, text=True)
    c1 = os.times()
    write_s = time.perf_counter() - t0
    if proc.returncode != 0:
        raise SystemExit(proc.stderr)
    with open(folder / "front.csv") as fh:
        front_rows = sum(1 for _ in fh) - 1
    result = {
        "code": str(args.code.resolve()),
        "commit": subprocess.run(["git", "-C", str(args.code), "rev-parse", "--short", "HEAD"],
                                 capture_output=True, text=True).stdout.strip() or None,
        "front_designs": front_rows,
        "folder": str(folder), "folder_made_s": round(made_s, 1),
        "afpm_front_wall_s": round(write_s, 2),
        "afpm_front_cpu_s": round(c1.children_user - c0.children_user + c1.children_system - c0.children_system, 2),
        "page_MB": round(page.stat().st_size / 1e6, 3),
        "time_to_interactive": load_time(page),
        "targets": {"page_MB": 5.0, "time_to_interactive_s": 3.0},
        "load_average_1min": os.getloadavg()[0],
    }
    print(json.dumps(result, indent=2))


if __name__ == "__main__":
    main()
