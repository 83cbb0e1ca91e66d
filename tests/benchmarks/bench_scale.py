"""Scale benchmark: geometry read-out of files on disk, approximate vs exact neighbours, a campaign on a dask
LocalCluster. Prints time, peak memory (psutil) and the load average beside each measurement.

    python tests/benchmarks/bench_scale.py geometry --rows 100000 300000 1000000 --dim 256 --dir DIR
    python tests/benchmarks/bench_scale.py ann --rows 100000 --dim 256 --dir DIR
    python tests/benchmarks/bench_scale.py campaign --rows 300000 --dim 256 --sizes 10000 100000 250000 --repeats 1 --each-size --dir DIR
    python tests/benchmarks/bench_scale.py cell --rows 300000 --dim 256 --sizes 250000 --learners net knn --dir DIR
    python tests/benchmarks/bench_scale.py cli --rows 300000 --dim 256 --sizes 1000 10000 100000 250000 --repeats 2 --learners net --dir DIR

``cell`` runs one cell of each size and learner in a fresh process as a worker runs it and reports the peak
memory of each step (reading rows, preparing, training, the neighbour graph, predicting). ``cli`` starts a dask scheduler and ``--workers`` single-thread workers as processes of their own (the
``dask scheduler`` / ``dask worker`` commands), runs ``manireg curves FILE --on-disk --scheduler ADDRESS`` as a
user would, and reports the peak resident memory of the command, the scheduler and each worker.

Files are written once per (rows, dim) into DIR with manireg.data.write_synthetic (graph manifold, d = 4,
float32). Each measurement runs in a fresh process so its peak resident memory is its own.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time


def _path(d, rows, dim):
    return os.path.join(d, f"g{rows}x{dim}.npy")


def ensure(d, rows, dim):
    from manireg.data import write_synthetic

    p = _path(d, rows, dim)
    if not os.path.exists(p):
        write_synthetic(p, "graph_manifold", rows, d=4, ambient_dim=dim, chunk_rows=16384, seed=0)
    return p


class Peak:
    """Peak resident memory of this process and its children: psutil samples every 20 ms, and the kernel's
    high-water mark of this process."""

    def __init__(self):
        import threading

        import psutil

        self.proc, self.peak, self.stop = psutil.Process(), 0, False
        self.phase, self.phases = "start", {}
        self.t = threading.Thread(target=self._run, daemon=True)
        self.t.start()

    def _rss(self):
        total = self.proc.memory_info().rss
        for c in self.proc.children(recursive=True):
            try:
                total += c.memory_info().rss
            except Exception:  # a child that ended between the listing and the read
                pass
        return total

    def _run(self):
        while not self.stop:
            rss = self._rss()
            self.peak = max(self.peak, rss)
            self.phases[self.phase] = max(self.phases.get(self.phase, 0), rss)
            time.sleep(0.02)

    def done(self):
        import resource

        self.stop = True
        self.t.join()
        return max(self.peak, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024)


def one_geometry(path, queries, landmarks):
    from manireg.data import open_table
    from manireg.geometry.ondisk import describe_geometry_on_disk

    from manireg.geometry import neighbors

    peak = Peak()
    peak.phase = "libraries"
    table = open_table(path, -1)
    scan, stream = table.scan, neighbors.stream_kneighbors

    def phased(name, fn, after):
        def run(*a, **kw):
            peak.phase = name
            out = fn(*a, **kw)
            peak.phase = after
            return out
        return run

    # the peak of each step: the check pass, the neighbour pass, the estimates, the charts
    table.scan = phased("check", scan, "between")
    neighbors.stream_kneighbors = phased("neighbours", stream, "estimates")
    step = lambda name: setattr(peak, "phase", name) if name == "charts" else None  # noqa: E731
    t0 = time.perf_counter()
    g = describe_geometry_on_disk(table, n_queries=queries, n_landmarks=landmarks, seed=0, callback=step)
    sec = time.perf_counter() - t0
    total = peak.done()
    return {"seconds": sec, "peak_mb": total / 2**20,
            "phase_peak_mb": {k: round(v / 2**20) for k, v in peak.phases.items()},
            "mle": g.estimates["mle"], "twonn": g.estimates["twonn"],
            "steps": g.seconds, "charts": g.atlas.n_charts, "reach": None if g.reach is None else g.reach.reach}


def one_ann(path, k, queries):
    import numpy as np

    from manireg.data import open_table
    from manireg.geometry.neighbors import _approximate, stream_kneighbors

    X = open_table(path, -1).to_array().astype(np.float32)
    # warm the numba compilation on a small array first: it is paid once per process, not per index
    t0 = time.perf_counter()
    _approximate(np.ascontiguousarray(X[:2000]), k, 0)
    compile_s = time.perf_counter() - t0
    peak = Peak()
    t0 = time.perf_counter()
    d_a, i_a = _approximate(X, k, 0)
    ann_s = time.perf_counter() - t0
    q = np.sort(np.random.default_rng(0).choice(len(X), queries, replace=False))
    t0 = time.perf_counter()
    g = stream_kneighbors(X.astype(np.float64), q, k)
    exact_q_s = time.perf_counter() - t0
    kth = g.distances[:, -1:] * (1 + 1e-5)
    recall = float(np.minimum((d_a[q] <= kth).sum(1), k).sum() / (queries * k))
    exact_all = exact_q_s * len(X) / queries  # exact all-points search extrapolated from the query pass
    return {"rows": len(X), "k": k, "compile_s": compile_s, "ann_s": ann_s, "exact_queries": queries,
            "exact_query_s": exact_q_s, "exact_all_s_extrapolated": exact_all, "speed_ratio": exact_all / ann_s,
            "recall": recall, "peak_mb": peak.done() / 2**20}


def one_campaign(path, sizes, repeats, workers, learners=("net", "knn")):
    """One campaign on a LocalCluster of ``workers`` single-thread worker processes. The scheduler's memory is
    read from its process, which for a LocalCluster is this client process (flagged in the result)."""
    import threading

    import psutil
    from distributed import Client, LocalCluster

    from manireg.curves import LearnerSpec
    from manireg.curves.campaign import Campaign
    from manireg.data import open_table

    store = path + f".campaign-{os.getpid()}.sqlite"
    cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None)
    client = Client(cluster)
    worker_pids = list(client.run(os.getpid).values())
    sched_pid = client.run_on_scheduler(os.getpid)
    peaks = {p: 0 for p in worker_pids}
    mem = {"scheduler": 0, "client": 0}
    stop = []

    def watch():
        me = psutil.Process()
        while not stop:
            for p in worker_pids:
                try:
                    peaks[p] = max(peaks[p], psutil.Process(p).memory_info().rss)
                except psutil.Error:
                    pass
            try:
                mem["scheduler"] = max(mem["scheduler"], psutil.Process(sched_pid).memory_info().rss)
            except psutil.Error:
                pass
            mem["client"] = max(mem["client"], me.memory_info().rss)
            time.sleep(0.05)

    th = threading.Thread(target=watch, daemon=True)
    th.start()
    table = open_table(path, -1)
    specs = []
    for name in learners:
        if name == "net":
            specs.append(LearnerSpec("net", params={"max_steps": 300, "eval_every": 50, "patience_steps": 200,
                                                    "min_steps": 50}))
        else:
            specs.append(LearnerSpec(name))
    camp = Campaign(X=table, y=None, sizes=sizes, repeats=repeats, learners=specs, dimension=4.0, smoothness=1.0,
                    seed=0, name="bench", store=store, test_size=2000)
    t0 = time.perf_counter()
    res = camp.run(executor="dask", scheduler=client, progress=False)
    sec = time.perf_counter() - t0
    stop.append(1)
    th.join()
    rows = res.rows
    per = rows.groupby(["learner", "n"])["seconds"].mean().round(2).to_dict()
    status = rows["status"].value_counts().to_dict()
    client.close()
    cluster.close()
    os.remove(store)
    return {"cells": len(rows), "status": status, "seconds": sec,
            "cell_seconds": {f"{l}@{n}": v for (l, n), v in per.items()},
            "worker_peak_mb": [round(v / 2**20) for v in peaks.values()],
            "scheduler_peak_mb": round(mem["scheduler"] / 2**20), "client_peak_mb": round(mem["client"] / 2**20),
            # a LocalCluster runs its scheduler in this (the client's) process: then the two figures are one
            "scheduler_in_client_process": sched_pid == os.getpid()}


def one_cell(path, n, learner="net"):
    """One campaign cell of size ``n`` run in this process (``run_unit``, as a worker runs it), with the peak
    resident memory of each step: reading the rows, preparing them, training, the neighbour graph, predicting."""
    import functools
    import gc

    import manireg.data.lazy as lazy
    import manireg.nets.training as training
    from manireg.curves import LearnerSpec
    from manireg.curves.campaign import Campaign
    from manireg.curves.execution import run_unit
    from manireg.data import open_table

    marks = [(lazy.LazyTable, "rows", "read rows"), (training._Prepared, "__init__", "prepare"),
             (training.BatchedTrainer, "_fit_group", "train"), (training.BatchedTrainer, "predict", "predict")]
    if learner == "knn":
        import pynndescent

        marks.append((pynndescent.NNDescent, "__init__", "neighbour graph"))
    peak = Peak()

    def mark(f, name):
        @functools.wraps(f)
        def g(*a, **k):
            old, peak.phase = peak.phase, name
            try:
                return f(*a, **k)
            finally:
                peak.phase = old
        return g

    for owner, attr, name in marks:
        setattr(owner, attr, mark(getattr(owner, attr), name))
    peak.phase = "libraries and campaign"
    spec = (LearnerSpec("net", params={"max_steps": 300, "eval_every": 50, "patience_steps": 200, "min_steps": 50})
            if learner == "net" else LearnerSpec(learner))
    store = path + f".cell-{os.getpid()}.sqlite"
    camp = Campaign(X=open_table(path, -1), y=None, sizes=[1000, n], repeats=1, learners=[spec], dimension=4.0,
                    smoothness=1.0, seed=0, name="bench", store=store, test_size=2000)
    cells = [c for c in camp.cells() if c.n == n]
    gc.collect()
    peak.phase = "idle"
    time.sleep(0.3)
    t0 = time.perf_counter()
    peak.phase = "cell (outside the steps below)"
    rows = run_unit(cells, camp.data)
    sec = time.perf_counter() - t0
    peak.phase = "after"
    time.sleep(0.2)
    total = peak.done()
    os.remove(store)
    return {"learner": learner, "n": n, "status": rows[0]["status"], "error": rows[0]["error"],
            "test_mse": rows[0]["test_mse"], "seconds": round(sec, 1), "peak_mb": round(total / 2**20),
            "phase_peak_mb": {k: round(v / 2**20) for k, v in peak.phases.items()}}


def cli_campaign(path, sizes, repeats, workers, learners, port=8786):
    """``manireg curves --on-disk --scheduler`` against a scheduler and workers started as their own processes
    (psutil watches each every 50 ms; a worker's memory includes the processes its nanny starts)."""
    import shutil
    import tempfile
    import threading

    import psutil

    dask = shutil.which("dask") or os.path.join(os.path.dirname(sys.executable), "dask")
    address = f"tcp://127.0.0.1:{port}"
    work = tempfile.mkdtemp(prefix="bench-cli-")
    logs = open(os.path.join(work, "cluster.log"), "w")
    sched = subprocess.Popen([dask, "scheduler", "--host", "127.0.0.1", "--port", str(port), "--no-dashboard"],
                             stdout=logs, stderr=logs)
    time.sleep(3)
    wk = subprocess.Popen([dask, "worker", address, "--nthreads", "1", "--nworkers", str(workers),
                           "--memory-limit", "0", "--no-dashboard", "--local-directory", work], stdout=logs, stderr=logs)
    time.sleep(8)
    peaks, stop = {}, []

    def watch(procs):
        while not stop:
            for name, pr in procs.items():
                try:
                    ps = psutil.Process(pr.pid)
                    kids = ps.children(recursive=True)
                    if name == "workers":  # one entry per worker process (children of the nanny processes)
                        for c in kids:
                            if "resource_tracker" not in " ".join(c.cmdline()):  # not the semaphore tracker
                                peaks[f"worker {c.pid}"] = max(peaks.get(f"worker {c.pid}", 0), c.memory_info().rss)
                    else:
                        rss = ps.memory_info().rss + sum(c.memory_info().rss for c in kids)
                        peaks[name] = max(peaks.get(name, 0), rss)
                except psutil.Error:
                    pass
            time.sleep(0.05)

    store = os.path.join(work, "campaign.sqlite")
    cmd = [os.path.join(os.path.dirname(sys.executable), "manireg"), "curves", path, "--target", "c%d" % (
        int(__import__("numpy").load(path, mmap_mode="r").shape[1]) - 1), "--on-disk", "--scheduler", address,
        "--sizes", *map(str, sizes), "--repeats", str(repeats), "--learners", *learners, "--no-geometry",
        "--dimension", "4", "--smoothness", "1", "--test-size", "2000", "--store", store, "--out", os.path.join(work, "out")]
    t0 = time.perf_counter()
    run = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)
    th = threading.Thread(target=watch, args=({"scheduler": sched, "workers": wk, "command": run},), daemon=True)
    th.start()
    out, _ = run.communicate()
    sec = time.perf_counter() - t0
    stop.append(1)
    th.join()
    wk.terminate()
    sched.terminate()
    wk.wait(30)
    sched.wait(30)
    logs.close()
    shutil.rmtree(work, ignore_errors=True)
    return {"command": " ".join(os.path.basename(c) if c.startswith(os.sep) else c for c in cmd), "exit": run.returncode,
            "seconds": round(sec, 1), "peak_mb": {k: round(v / 2**20) for k, v in sorted(peaks.items())},
            "output_tail": out.splitlines()[-25:]}


def _child(kind, kwargs):
    """Run one measurement in a fresh process; return its JSON."""
    code = f"import json,sys; sys.path.insert(0, {os.path.dirname(__file__)!r}); import bench_scale as b; " \
           f"print('RESULT' + json.dumps(b.one_{kind}(**{kwargs!r})))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    for line in out.stdout.splitlines():
        if line.startswith("RESULT"):
            return json.loads(line[6:])
    raise RuntimeError(out.stderr[-2000:])


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("what", choices=["geometry", "ann", "campaign", "cli", "cell"])
    ap.add_argument("--rows", type=int, nargs="+", default=[100_000])
    ap.add_argument("--dim", type=int, default=256)
    ap.add_argument("--dir", default=os.environ.get("TMPDIR", "/tmp"))
    ap.add_argument("--queries", type=int, default=2000)
    ap.add_argument("--landmarks", type=int, default=4000)
    ap.add_argument("--sizes", type=int, nargs="+", default=[1000, 4000, 16000])
    ap.add_argument("--repeats", type=int, default=2)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--each-size", action="store_true",
                    help="campaign: one cluster per size (beside a 1,000-row size), so each size's worker peak is its own")
    ap.add_argument("--learners", nargs="+", default=["net", "knn"])
    a = ap.parse_args()
    for rows in a.rows:
        p = ensure(a.dir, rows, a.dim)
        load = os.getloadavg()[0]
        if a.what == "geometry":
            r = _child("geometry", {"path": p, "queries": a.queries, "landmarks": a.landmarks})
        elif a.what == "ann":
            r = _child("ann", {"path": p, "k": 20, "queries": 500})
        elif a.what == "cli":
            r = cli_campaign(p, a.sizes, a.repeats, a.workers, a.learners)
        elif a.what == "cell":
            for n in a.sizes:
                for learner in a.learners:
                    load = os.getloadavg()[0]
                    r = _child("cell", {"path": p, "n": n, "learner": learner})
                    r.update(rows=rows, dim=a.dim, load_before=round(load, 2), load_after=round(os.getloadavg()[0], 2))
                    print(json.dumps(r), flush=True)
            continue
        else:
            # a campaign needs two sizes: each size runs beside a 1,000-row one
            for sizes in ([sorted({1000, n}) for n in a.sizes] if a.each_size else [a.sizes]):
                load = os.getloadavg()[0]
                r = _child("campaign", {"path": p, "sizes": sizes, "repeats": a.repeats, "workers": a.workers,
                                        "learners": a.learners})
                r.update(rows=rows, dim=a.dim, sizes=sizes, load_before=round(load, 2),
                         load_after=round(os.getloadavg()[0], 2))
                print(json.dumps(r), flush=True)
            continue
        r.update(rows=rows, dim=a.dim, load_before=round(load, 2), load_after=round(os.getloadavg()[0], 2))
        print(json.dumps(r), flush=True)


if __name__ == "__main__":
    main()
