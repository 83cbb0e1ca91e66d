"""Benchmark: what the 2-D view adds to `manireg geometry`, measured side by side in one run.

Run as a script (pytest does not collect it):

    python tests/benchmarks/bench_view.py            # 4,000 and 50,000 rows, default (spectral) view
    python tests/benchmarks/bench_view.py --quick    # 4,000 rows only
    python tests/benchmarks/bench_view.py --umap     # also the UMAP view (--view umap)

Data: a 2-sphere in R^16 (manireg.data.sphere) with the target sin(2 x1) + x2, written as CSV. Each
setting runs the full command (`python -m manireg geometry FILE --target y --quiet`, a fresh process each
time, as a user runs it) once to warm the file cache and any on-disk compilation cache, then
``--runs`` more times; the timed runs of the settings alternate, so load drift hits all of them. The
printed ratio is the median time with the view over the median time with ``--no-view``; the goal is 1.5
or less. The machine may be shared: the load average is printed beside the timings.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np


def write_table(path, n, seed=0):
    from manireg.data import sphere

    X = sphere(n, 2, ambient_dim=16, seed=seed).points
    y = np.sin(2 * X[:, 0]) + X[:, 1]
    header = ",".join([f"x{i}" for i in range(X.shape[1])] + ["y"])
    np.savetxt(path, np.column_stack([X, y]), delimiter=",", header=header, comments="", fmt="%.8g")


def run_once(path, out, flags):
    cmd = [sys.executable, "-m", "manireg", "geometry", path, "--target", "y", "--quiet", "--out", out, *flags]
    t = time.perf_counter()
    proc = subprocess.run(cmd, capture_output=True, text=True)
    secs = time.perf_counter() - t
    if proc.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)} failed:\n{proc.stderr[-2000:]}")
    return secs


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="4,000 rows only")
    parser.add_argument("--umap", action="store_true", help="also time --view umap")
    parser.add_argument("--runs", type=int, default=2, help="timed runs per setting after the warm-up run")
    args = parser.parse_args(argv)
    sizes = [4000] if args.quick else [4000, 50000]
    settings = [("no view", ["--no-view"]), ("spectral view", ["--view", "spectral"])]
    if args.umap:
        settings.append(("UMAP view", ["--view", "umap"]))
    print(f"python {sys.version.split()[0]}; {os.cpu_count()} cores (shared with other work); "
          f"load average at start {tuple(round(v, 2) for v in os.getloadavg())}")
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n in sizes:
            path = os.path.join(tmp, f"sphere_{n}.csv")
            write_table(path, n)
            times = {name: [] for name, _ in settings}
            for name, flags in settings:  # warm-up: file cache, compilation caches
                run_once(path, os.path.join(tmp, "out"), flags)
            for _ in range(args.runs):
                for name, flags in settings:
                    times[name].append(run_once(path, os.path.join(tmp, "out"), flags))
            med = {name: statistics.median(v) for name, v in times.items()}
            base = med["no view"]
            rows.append((n, med, base))
            print(f"{n:>6} rows: " + ", ".join(f"{name} {med[name]:.1f} s ({', '.join(f'{t:.1f}' for t in times[name])})"
                                               for name, _ in settings)
                  + f"; load average {tuple(round(v, 2) for v in os.getloadavg())}", flush=True)
    print()
    print("| rows | " + " | ".join(f"{name} (s)" for name, _ in settings) + " | "
          + " | ".join(f"{name} / no view" for name, _ in settings[1:]) + " |")
    print("|---" * (2 * len(settings)) + "|")
    for n, med, base in rows:
        print(f"| {n:,} | " + " | ".join(f"{med[name]:.1f}" for name, _ in settings) + " | "
              + " | ".join(f"{med[name] / base:.2f}" for name, _ in settings[1:]) + " |")
    worst = max(med[name] / base for _, med, base in rows for name, _ in settings[1:2])
    print(f"\ngoal: the default view within 1.5x of --no-view: {'met' if worst <= 1.5 else 'not met'} "
          f"(worst ratio {worst:.2f})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
