"""Run the cells of a campaign in-process, in local worker processes, or on a dask.distributed cluster.

The pending cells (those not yet in the store) are grouped into work units: all repeats of one net learner
at one n form one unit (they share an architecture and go to one ``BatchedTrainer.fit`` call); every other
cell is a unit of its own. The parallel executors also split a unit that would cost more than one
worker's share of the whole (estimated flops, :meth:`Learner.cell_cost`) into halves, and submit the
costliest units first; a replica's numbers do not depend on its stack, so this changes no row. A unit is a plain function call, :func:`run_unit`, that returns one row per
cell; a unit that raises gives ``status="failed"`` rows carrying the error message. The parent process
writes each unit's rows as they arrive, one transaction per cell, so a killed run loses only the units in
flight.

Executors:

``"auto"``
    ``"inprocess"`` when the estimated work is too small to pay for starting worker processes, else
    ``"processes"`` (:func:`choose_executor` has the rule and its measured constants). Workers of an earlier
    ``"processes"`` run of this session are reused (joblib keeps its loky executor alive for
    :data:`WARM_SECONDS` after a run [1]_), and ``"auto"`` counts them as already started.
``"inprocess"``
    Units run one after another in this process.
``"processes"``
    Units run in ``n_jobs`` local worker processes (joblib's loky backend [1]_).
``"dask"``
    Units are submitted to a dask.distributed cluster [2]_ (``client.submit`` / ``as_completed``): pass
    ``scheduler="tcp://host:8786"`` or a ``Client``; with neither, a local cluster of ``n_jobs`` single-thread
    workers is started and closed afterwards. This is the way past one machine.

Rows do not depend on the executor or on how units were split: every random step is seeded from the
cell, torch runs with ``torch_threads`` intra-op threads inside every unit (1 by default), and the trainer
keeps each replica's arithmetic independent of the others in its stack, so float reductions happen in the
same order everywhere (tested bit for bit). Only ``seconds`` and ``created_at`` differ between runs on one
machine; a different CPU may round differently.

References
----------
.. [1] joblib, "Embarrassingly parallel for loops", https://joblib.readthedocs.io/en/stable/parallel.html
.. [2] Dask.distributed, "Futures", https://distributed.dask.org/en/stable/client.html
"""

from __future__ import annotations

import datetime
import os
import sys
import traceback

from manireg._threads import torch_threads as _torch_threads
from manireg._validation import check_choice, check_int
from manireg.curves.learners import make_learner
from manireg.curves.sweep import ROW_COLUMNS, canonical_json

__all__ = ["run_cells", "run_unit", "make_units", "choose_executor", "EXECUTORS", "RunSummary", "SchedulerUnreachable",
           "WorkerLost", "SCHEDULER_TIMEOUT"]

EXECUTORS = ("auto", "inprocess", "processes", "dask")

#: Seconds a fresh worker process needs before its first unit runs: spawn, ``import torch`` and the trainer,
#: receiving the campaign data. Measured by ``tests/benchmarks/bench_campaign.py`` (first arrival minus that
#: unit's training time) on a 2-core machine: 2.1-2.4 s when idle, more under load.
WORKER_START_SECONDS = 2.4
#: Seconds this process needs to import torch and the trainer before its first in-process unit
#: (``python -c "import manireg.curves.execution, manireg.nets.training"``: 1.7 s idle; 0 once imported).
#: A campaign with net learners imports torch when it is built (the nets are sized then), so in practice
#: this counts only for campaigns without nets, where it overstates the in-process time (a kNN unit needs
#: no torch): a conservative error, towards worker processes.
IMPORT_SECONDS = 1.7
#: Estimated flops (:meth:`Learner.cell_cost`) done per second by one unit on one thread. The estimate counts
#: every allowed step, nets usually stop earlier, so this is a rate of the estimate, not of the CPU: the
#: quick benchmark grid (2.8e11 estimated flops, float32) ran in process in 6.0-10.4 s on a loaded 2-core
#: machine (load 2-5), 2.7e10-4.6e10 per second; the standard grid (5.2e12) in 170-173 s at load 1.8-3.0,
#: where this rate predicts 175 s (``tests/benchmarks/bench_campaign.py``, one core).
FLOP_RATE = 3.0e10
#: joblib's loky executor keeps idle workers this long (its ``idle_worker_timeout``, 300 s by default);
#: ``"auto"`` counts workers used less than this long ago (with a margin) as warm.
WARM_SECONDS = 240.0

_last_pool = {}  # worker count -> time.monotonic() when a "processes" run with that many workers ended

#: Seconds to wait for a dask scheduler given by address before giving up with :class:`SchedulerUnreachable`.
SCHEDULER_TIMEOUT = 15.0


class SchedulerUnreachable(ValueError):
    """The dask scheduler address did not answer within :data:`SCHEDULER_TIMEOUT` seconds (nothing ran)."""


class WorkerLost(RuntimeError):
    """A worker process died while running a unit. Every unit that finished is stored; the lost unit's
    cells were not written and run when the campaign is resumed."""


class RunSummary(dict):
    """What :func:`run_cells` did: ``total``, ``skipped``, ``ran``, ``failed`` counts, the ``executor`` and
    whether a ``stop`` request ended it early (``stopped``)."""


def make_units(cells, data=None, n_workers=1) -> list:
    """Group cells into work units: a batchable learner's cells of one n together, others alone.

    With ``n_workers > 1`` (and ``data``) the units are also balanced: while the costliest unit (by the
    learners' :meth:`~manireg.curves.learners.Learner.cell_cost`) costs more than ``1 / n_workers`` of
    the whole and holds more than one cell, it is split into two halves. Otherwise that one unit would
    be the critical path: in the standard benchmark campaign the five replicas at the largest n are over
    half of all the work. A replica's numbers do not depend on which replicas share its stack (see
    :class:`manireg.nets.training.BatchedTrainer`), so splitting changes timing, never rows. The
    balanced units come costliest first (longest-processing-time order): the biggest unit starts at once
    while the other workers take the small ones.

    Parameters
    ----------
    cells : list of Cell
    data : CampaignData, optional
        Needed for the cost estimate when ``n_workers > 1``.
    n_workers : int, default=1

    Returns
    -------
    list of list of Cell
        In the order of first appearance, or costliest first when balanced.
    """
    units, index = [], {}
    for c in cells:
        if make_learner(c.learner).batchable:
            k = c.unit_key
            if k not in index:
                index[k] = len(units)
                units.append([])
            units[index[k]].append(c)
        else:
            units.append([c])
    if n_workers <= 1 or data is None or len(units) == 0:
        return units
    per_cell = [_cell_cost(u, data) for u in units]
    costs = [len(u) * c for u, c in zip(units, per_cell)]
    share = sum(costs) / n_workers
    while True:
        i = max(range(len(units)), key=costs.__getitem__)
        if costs[i] <= share or len(units[i]) < 2:
            break
        unit, half = units[i], (len(units[i]) + 1) // 2
        units[i:i + 1] = [unit[:half], unit[half:]]
        per_cell[i:i + 1] = [per_cell[i]] * 2
        costs[i:i + 1] = [half * per_cell[i], (len(unit) - half) * per_cell[i]]
    order = sorted(range(len(units)), key=lambda k: -costs[k])
    return [units[k] for k in order]


def choose_executor(cells, data, n_jobs=None) -> tuple:
    """The executor ``"auto"`` picks for these (pending) cells: ``("inprocess" or "processes", reason)``.

    The rule compares two wall-time estimates, with W the estimated flops of all cells
    (:meth:`Learner.cell_cost`), r = :data:`FLOP_RATE`, p the worker count and U the costliest unit after
    :func:`make_units` balanced them over p workers:

    * in process: ``I + W / r``, where I = :data:`IMPORT_SECONDS` if torch is not yet imported here, else 0;
    * worker processes: ``S + max(W / p, U) / r``, where S = :data:`WORKER_START_SECONDS`, or 0 when this
      process ran ``"processes"`` with p workers less than :data:`WARM_SECONDS` ago (joblib reuses them).

    In process wins when ``I + W/r <= S + max(W/p, U)/r``; with U <= W/p that is
    ``W <= (S - I) r p / (p - 1)``: with the constants above, 4.2e10 flops in a fresh process (torch not
    loaded: the import is most of a worker's start-up too) and 1.4e11 flops (about 4.8 s of work) once torch
    is loaded, for two cold workers. With one worker, or one cell, processes never win.
    Rows do not depend on the choice (see the module docstring).
    """
    import time

    workers = n_jobs or os.cpu_count() or 1
    if workers <= 1 or len(cells) <= 1:
        return "inprocess", f"{workers} worker(s), {len(cells)} cell(s): nothing to share"
    units = make_units(cells, data, workers)
    costs = [len(u) * _cell_cost(u, data) for u in units]
    total = sum(costs)
    load = "torch" not in sys.modules
    warm = time.monotonic() - _last_pool.get(workers, -1e18) < WARM_SECONDS
    t_in = (IMPORT_SECONDS if load else 0.0) + total / FLOP_RATE
    t_proc = (0.0 if warm else WORKER_START_SECONDS) + max(total / workers, max(costs)) / FLOP_RATE
    why = (f"estimated {total:.2g} flops: {t_in:.1f} s in process{' (with the torch import)' if load else ''}, "
           f"{t_proc:.1f} s on {workers} {'warm' if warm else 'new'} workers")
    return ("inprocess" if t_in <= t_proc else "processes"), why


def _base_row(cell):
    return {"key": cell.key, "campaign": cell.campaign, "learner": cell.learner.name, "n": cell.n,
            "repeat": cell.repeat, "seed": cell.seed, "config_json": canonical_json(cell.config)}


def run_unit(cells, data, torch_threads: int = 1) -> list:
    """Run one work unit and return one row (dict with :data:`ROW_COLUMNS`) per cell, in order.

    Never raises for a failing learner: its cells come back with ``status="failed"`` and the error.

    Parameters
    ----------
    cells : list of Cell
        Cells of one learner (and, for batchable learners, one n).
    data : CampaignData
    torch_threads : int, default=1
        torch intra-op threads while the unit runs (restored afterwards).
    """
    learner = make_learner(cells[0].learner)
    now = datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds")
    try:
        with _torch_threads(torch_threads):
            metrics = learner.run(list(cells), data)
        status, error = "ok", None
    except Exception as exc:  # noqa: BLE001 - a failing cell is recorded, not raised
        tb = traceback.format_exception_only(type(exc), exc)[-1].strip()
        metrics, status, error = [{} for _ in cells], "failed", tb
    _give_back_memory()
    rows = []
    for c, m in zip(cells, metrics):
        row = dict.fromkeys(ROW_COLUMNS)
        row.update(_base_row(c))
        row.update(m)
        row.update(status=status, error=error, created_at=now)
        rows.append(row)
    return rows


def _give_back_memory():
    """After a unit: collect garbage and hand the C heap's free pages back to the system (glibc's
    ``malloc_trim``; elsewhere nothing). A worker runs one unit after another, and without this the pages a
    large cell freed stay in its resident memory while the next cell allocates in a different pattern (a
    worker that ran a 2.5e5-row kNN cell and then a net cell sat at ~2 GB)."""
    import gc

    gc.collect()
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            ctypes.CDLL("libc.so.6").malloc_trim(0)
        except (OSError, AttributeError):  # not glibc (e.g. musl): nothing to trim
            pass


def _progress(total, initial, enabled, desc):
    if not enabled:
        return None
    from tqdm.auto import tqdm

    return tqdm(total=total, initial=initial, desc=f"campaign '{desc}'", dynamic_ncols=True, file=sys.stderr,
                bar_format="{desc}: {n_fmt}/{total_fmt} cells {bar} [{elapsed}<{remaining}]")


def run_cells(cells, data, store, executor="inprocess", n_jobs=None, scheduler=None, progress=True, *,
              retry_failed=False, torch_threads=1, stop=None, on_unit=None) -> RunSummary:
    """Run the cells that are not yet in ``store`` and write their rows there.

    Parameters
    ----------
    cells : list of Cell
        From :func:`manireg.curves.sweep.expand`.
    data : CampaignData
        From :func:`manireg.curves.sweep.prepare` (the same the cells were expanded from).
    store : ResultStore
    executor : {"auto", "inprocess", "processes", "dask"}, default="inprocess"
        ``"auto"``: in process or worker processes, whichever :func:`choose_executor` estimates to finish
        first; the summary's ``executor`` says which ran and ``executor_reason`` why.
    n_jobs : int, optional
        Worker processes for ``"processes"`` (default: CPU count) and workers of the local dask cluster
        started when ``executor="dask"`` has no ``scheduler`` (default 2).
    scheduler : str or distributed.Client, optional
        Address of a dask scheduler (``"tcp://host:8786"``) or a connected Client.
    progress : bool, default=True
        A tqdm bar (``tqdm.auto``: the notebook widget in Jupyter) with cells done / total and time left.
    retry_failed : bool, default=False
        Run cells stored with ``status="failed"`` again (otherwise they count as done).
    torch_threads : int, default=1
        torch threads inside each unit; keep it fixed to keep rows identical across executors.
    stop : object with ``is_set()`` (e.g. ``threading.Event``), optional
        Checked before each unit is started and after each unit finishes: once set, no further unit starts
        (units in flight finish and are stored). This is how a notebook panel pauses a campaign.
    on_unit : callable(rows), optional
        Called in the calling process after each finished unit's rows are stored (live plots).

    Returns
    -------
    RunSummary

    Raises
    ------
    KeyboardInterrupt
        Re-raised after submission stops; every unit that finished is already stored.

    References
    ----------
    .. [1] joblib parallel: https://joblib.readthedocs.io/en/stable/parallel.html
    .. [2] dask.distributed futures: https://distributed.dask.org/en/stable/client.html
    """
    owner = "run_cells"
    check_choice(executor, "executor", owner=owner, choices=EXECUTORS)
    torch_threads = check_int(torch_threads, "torch_threads", owner=owner, low=1)
    if n_jobs is not None:
        n_jobs = check_int(n_jobs, "n_jobs", owner=owner, low=1)
    done = store.finished_keys(include_failed=not retry_failed)
    pending = [c for c in cells if c.key not in done]
    total = len(cells)
    summary = RunSummary(total=total, skipped=total - len(pending), ran=0, failed=0, executor=executor)
    if not pending:
        return summary
    if executor == "auto":
        executor, summary["executor_reason"] = choose_executor(pending, data, n_jobs)
        summary["executor"] = executor
    bar = _progress(total, total - len(pending), progress, getattr(data, "name", "campaign"))

    def stopped():
        return stop is not None and stop.is_set()

    def record(rows):
        for row in rows:
            store.put(row)
            summary["ran"] += 1
            summary["failed"] += row["status"] != "ok"
        if bar is not None:
            bar.update(len(rows))
        if on_unit is not None:
            on_unit(rows)
        return stopped()

    summary["stopped"] = False
    try:
        if executor == "inprocess":
            for unit in make_units(pending):
                if stopped():
                    break
                record(run_unit(unit, data, torch_threads))
        elif executor == "processes":
            workers = n_jobs or os.cpu_count() or 1
            _run_joblib(make_units(pending, data, workers), data, workers, torch_threads, record)
        else:
            _run_dask(pending, data, scheduler, n_jobs or 2, torch_threads, record)
    except Exception as exc:  # a dead worker: say what is kept and how to go on
        if type(exc).__name__ not in ("TerminatedWorkerError", "KilledWorker", "BrokenProcessPool"):
            raise
        raise WorkerLost(
            f"a worker process died while running cells ({type(exc).__name__}: {' '.join(str(exc).split())[:200]}). "
            f"{summary['ran']} finished cell(s) of this run are stored; the cells that were running are not. Run the "
            "same campaign again to resume: only the missing cells run (a worker that dies again on the same cell "
            "points at that cell's memory needs)."
        ) from None
    finally:
        if bar is not None:
            bar.close()
    summary["stopped"] = stopped() and summary["ran"] + summary["skipped"] < total
    return summary


def _cell_cost(unit, data):
    """Estimated flops of one cell of a unit (its learner's ``cell_cost``).

    Only a scheduling hint: if a learner's estimate fails (a custom learner's ``cell_cost`` may not
    know this data), the generic distance-computation estimate of the base class is used instead, and
    the error itself surfaces when the unit runs.
    """
    from manireg.curves.learners import Learner

    learner = make_learner(unit[0].learner)
    try:
        return float(learner.cell_cost(int(unit[0].n), data))
    except Exception:  # noqa: BLE001 - a failing estimate must not stop the run
        return Learner.cell_cost(learner, int(unit[0].n), data)


def _run_joblib(units, data, n_jobs, torch_threads, record):
    import time

    from joblib import Parallel, delayed

    par = Parallel(n_jobs=n_jobs, backend="loky", return_as="generator_unordered")
    gen = par(delayed(run_unit)(u, data, torch_threads) for u in units)
    try:
        for rows in gen:
            if record(rows):
                break  # stop requested: the generator is closed below, queued units are dropped
    finally:
        close = getattr(gen, "close", None)
        if close is not None:
            close()  # on KeyboardInterrupt: stop dispatching, abort what is queued
        _last_pool[n_jobs] = time.monotonic()  # joblib keeps these workers for the next run (choose_executor)


def _run_dask(cells, data, scheduler, n_workers, torch_threads, record):
    try:
        from distributed import Client, LocalCluster, as_completed
    except ImportError:  # pragma: no cover - optional dependency
        raise ImportError(
            "executor='dask' needs dask.distributed; install it with pip install 'manireg[distributed]' "
            "or pick executor='processes'."
        ) from None
    own_client, cluster = False, None
    if scheduler is None:
        cluster = LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=True, dashboard_address=None)
        client, own_client = Client(cluster), True
    elif isinstance(scheduler, str):
        try:
            client, own_client = Client(scheduler, timeout=SCHEDULER_TIMEOUT), True
        except (OSError, TimeoutError) as exc:
            raise SchedulerUnreachable(
                f"no dask scheduler answered at '{scheduler}' within {SCHEDULER_TIMEOUT:g} s ({type(exc).__name__}). "
                "Nothing ran and nothing stored was changed. Check the address (tcp://HOST:PORT, as printed by "
                "dask scheduler) and that the scheduler is running, or use --workers N for local processes."
            ) from None
    elif isinstance(scheduler, Client):
        client = scheduler
    else:
        raise ValueError(
            f"the 'scheduler' parameter of run_cells must be a dask scheduler address (str), a "
            f"distributed.Client or None; got {type(scheduler).__name__}."
        )
    futures = []
    try:
        units = make_units(cells, data, max(1, sum(client.nthreads().values())))
        data_future = client.scatter(data, broadcast=True)
        futures = [client.submit(run_unit, u, data_future, torch_threads, pure=False) for u in units]
        for fut in as_completed(futures):
            if record(fut.result()):
                break
        for f in futures:  # after a stop request: cancel what has not run
            if not f.done():
                f.cancel()
    except BaseException:
        for f in futures:
            if not f.done():
                f.cancel()
        raise
    finally:
        if own_client:
            client.close()
        if cluster is not None:
            cluster.close()
