"""Many blades at once: a folder (or list) of job files run in parallel, one summary.

``bladesolid batch JOBS... --out OUT`` runs every job with the same analysis (``loads`` by
default; ``--command mass|loads|check``) and writes

* ``OUT/<job stem>/report.json`` for each job (``check``: the whole review folder there), each
  folder appearing whole or not at all (:func:`bladesolid.report.staged_folder`);
* ``OUT/summary.csv`` and ``OUT/summary.json`` (atomic), one row per blade: name, mass, CG
  radius, radial pull and CTM at the job's first operating point, status and the one-line
  reason of a failure.

One bad blade never stops the rest: every job is run, failures are listed at the end, and the
exit status is 0 when all succeeded, 1 when all ran but a ``check`` comparison is outside its
limits, 2 when any job had bad input (or failed).

The jobs are dask tasks. Without ``--scheduler`` they run on this machine in a
``distributed.LocalCluster`` of worker processes (one thread each: the numba kernels are
already parallel, and separate processes keep one blade's memory apart from the others');
with ``--scheduler tcp://host:8786`` the very same tasks go to a remote cluster.
``--workers 0`` runs them one after the other in this process, without dask (debugging).
The task, :func:`run_job`, is a plain top-level function of a job path and an options dict
that returns a small dict, so it pickles to any worker.

Running thousands of blades on a cluster
----------------------------------------
A repair shop with thousands of scanned blades puts the meshes and job files where every
machine sees them under the same path: a shared filesystem (NFS, SMB, Lustre, ...) mounted
at the same place on all machines, e.g. ``/shop/blades/jobs/*.toml`` with relative ``mesh =``
paths beside them. (Meshes kept in an object store are first copied to that shared or to each
node's local disk, e.g. by the worker's start-up script; bladesolid reads ordinary files.)
Then::

    # on one machine (the scheduler):
    dask-scheduler                                    # listens on tcp://host:8786
    # on every compute machine, one worker process per core, one thread each:
    dask-worker tcp://host:8786 --nworkers auto --nthreads 1 --memory-limit 8GB
    # from any machine with the same shared paths:
    bladesolid batch /shop/blades/jobs/ --out /shop/blades/results/ --scheduler tcp://host:8786

Workers need bladesolid installed (same version), ``NUMBA_NUM_THREADS=1`` in their
environment when several worker processes share a machine (else each one's kernels use every
core), and write their results straight into
``--out`` (so it must be on the shared filesystem too); the machine that runs ``bladesolid
batch`` only schedules, shows the progress and writes the two summary files. Each job is
independent, so the run scales with the number of worker processes until the shared
filesystem's bandwidth is the limit; a worker that dies (out of memory on a huge scan) only
fails its own blade, which is listed with the reason. Re-running with ``--force`` replaces
earlier results; without it, jobs whose output folder exists are reported, not overwritten.
"""

from __future__ import annotations

import math
import os
import re
import socket
import time
from dataclasses import dataclass

from .errors import InputError, one_line
from .safefile import write_caution_file

__all__ = ["COLUMNS", "COMMANDS", "SUMMARY_SCHEMA", "BatchResult", "collect_jobs", "lost_worker_reason", "run_batch",
           "run_job"]

COMMANDS = ("mass", "loads", "check")
SUMMARY_SCHEMA = "bladesolid.batch/1"

#: summary columns, in order (units in the names; docs/CONVENTIONS.md §6 keys where they exist)
COLUMNS = ("job", "name", "status", "mass_kg", "cg_radius_m", "operating_point", "rpm", "blade_angle_deg",
           "radial_pull_N", "ctm_Nm", "output", "seconds", "reason")

OK, BAD_INPUT, FAILED, OUTSIDE = "ok", "bad input", "failed", "outside limits"


# --- which jobs ------------------------------------------------------------------------------


def collect_jobs(inputs) -> list[str]:
    """Job file paths from folders (their ``*.toml``, sorted), job files, and text files that
    list job files (one per line; blank lines and ``#`` comments skipped; relative paths are
    taken from the list file's folder). Duplicates are kept once, in first-seen order.

    A missing or unreadable job listed is kept: it becomes a failed row, not a stop.
    """
    out: list[str] = []
    for item in inputs:
        p = os.fspath(item)
        if os.path.isdir(p):
            found = sorted(os.path.join(p, n) for n in os.listdir(p) if n.lower().endswith(".toml"))
            if not found:
                raise InputError(p, "no job files (*.toml) in this folder")
            out.extend(found)
        elif p.lower().endswith(".toml"):
            out.append(p)
        elif os.path.isfile(p):
            base = os.path.dirname(os.path.abspath(p))
            try:
                with open(p, encoding="utf-8") as fh:
                    lines = fh.read(50_000_000).splitlines()
            except (OSError, UnicodeDecodeError) as exc:
                raise InputError(p, f"cannot be read as a list of job files ({exc})") from None
            listed = [s.strip() for s in lines if s.strip() and not s.strip().startswith("#")]
            if not listed:
                raise InputError(p, "lists no job files (expected one .toml path per line)")
            out.extend(s if os.path.isabs(s) else os.path.join(base, s) for s in listed)
        else:
            raise InputError(p, "not found: expected a folder of job files, a job file (.toml) or a text file listing them")
    seen, unique = set(), []
    for p in out:
        key = os.path.abspath(p)
        if key not in seen:
            seen.add(key)
            unique.append(key)
    return unique


def _output_names(jobs) -> list[str]:
    """A safe, unique output folder name per job: its file stem, with characters other than
    letters, digits, ``.``, ``_`` and ``-`` replaced, and ``-2``, ``-3``... on clashes.

    >>> _output_names(["a/blade 1.toml", "b/Blade 1.toml", "../.hidden.toml", "c/summary.toml"])
    ['blade_1', 'Blade_1-2', 'job_.hidden', 'summary']
    """
    names, used = [], set()
    for p in jobs:
        stem = os.path.splitext(os.path.basename(os.fspath(p)))[0]
        stem = re.sub(r"[^A-Za-z0-9._-]", "_", stem)[:120]
        if not stem or stem.startswith("."):
            stem = "job_" + stem
        name, k = stem, 1
        while name.lower() in used:
            k += 1
            name = f"{stem}-{k}"
        used.add(name.lower())
        names.append(name)
    return names


# --- one job (the dask task) ---------------------------------------------------------------------


def _about(job_path, problem) -> str:
    """The reason of a failure as one line that names the job file."""
    text = one_line(problem)
    job = os.fspath(job_path)
    return text if text.startswith(job) else one_line(f"{job}: {text}")


def lost_worker_reason(job_path, exc: BaseException) -> str:
    """The one-line reason of a job whose task ended without a row: its worker process died
    (dask's ``KilledWorker``: the process was killed, most often by the out-of-memory killer or
    the nanny's memory limit) or was lost with the connection to it.

    >>> class KilledWorker(Exception): pass
    >>> lost_worker_reason("/jobs/b7.toml", KilledWorker("Attempted to run task ... 3 times"))
    '/jobs/b7.toml: worker process died (out of memory?) while processing this blade; try a coarser mesh or workers with more memory'
    """
    name = type(exc).__name__
    if name in ("KilledWorker", "CommClosedError", "CancelledError", "FutureCancelledError") or isinstance(
            exc, (ConnectionError, EOFError)):
        return _about(job_path, "worker process died (out of memory?) while processing this blade; try a coarser "
                                "mesh or workers with more memory")
    return _about(job_path, f"the worker running it failed ({name}: {one_line(exc, 200)})")


def _finite(x):
    x = float(x)
    return x if math.isfinite(x) else None


def run_job(job_path: str, options: dict) -> dict:
    """Run one job and write its output; never raises for a bad blade (the dask task).

    job_path : a job file (.toml)
    options : ``{"command": "mass"|"loads"|"check", "out": folder (must exist), "name": output
      folder name under ``out``, "force": bool, "numba_threads": int or None}``
    Returns a summary row (see :data:`COLUMNS`) plus ``"host"`` and ``"pid"``.
    """
    t0 = time.perf_counter()
    command = options.get("command", "loads")
    name = options.get("name") or _output_names([job_path])[0]
    folder = os.path.join(os.fspath(options["out"]), name)
    row = {c: None for c in COLUMNS}
    row.update(job=os.fspath(job_path), status=FAILED, output=None, host=socket.gethostname(), pid=os.getpid())
    try:
        threads = options.get("numba_threads")
        if threads:
            import numba

            numba.set_num_threads(max(1, min(int(threads), numba.config.NUMBA_NUM_THREADS)))
        row.update(_run(job_path, command, folder, bool(options.get("force"))))
        row["output"] = name
    except InputError as exc:
        row.update(status=BAD_INPUT, reason=_about(job_path, exc))
    except MemoryError:
        row.update(status=FAILED, reason=_about(job_path, "out of memory; try a coarser mesh or a worker with more memory"))
    except Exception as exc:  # one blade's bug must not stop the others; the reason is kept
        row.update(status=FAILED, reason=_about(job_path, f"{type(exc).__name__}: {exc}"))
    row["seconds"] = time.perf_counter() - t0
    return row


def _run(job_path, command, folder, force) -> dict:
    from . import api, report
    from .job import load_job, require_operating_points
    from .review import loads_report
    from .safefile import check_new_folder

    if command not in COMMANDS:
        raise InputError("command", f"expected one of {', '.join(COMMANDS)}, got {command!r}")
    check_new_folder(folder, force)  # refused before any work
    job = load_job(job_path)
    status = OK
    if command == "check":
        from . import review

        rv = review.check(job, folder, force)
        blade, ops, data = rv.blade, rv.ops, rv.report
        if (data.get("comparison") or {}).get("verdict") == "outside limits":
            status = OUTSIDE
    else:
        blade = api.blade_from_job(job, elements=False)
        ops = api.loads_for_job(blade, job)
        if command == "loads":
            require_operating_points(job)
            data = loads_report(blade, job, ops)
        else:
            data = report.mass_report(blade, api.mass_properties(blade))
        from .review import mended_name

        mended = mended_name(blade)
        if mended and isinstance(data.get("geometry"), dict):
            data["geometry"]["repaired_surface"] = mended
        with report.staged_folder(folder, force) as tmp:
            with open(os.path.join(tmp, "report.json"), "w", encoding="utf-8") as fh:
                fh.write(report.dumps(data))
            if mended:
                from .io import stl_bytes

                with open(os.path.join(tmp, mended), "wb") as fh:
                    fh.write(stl_bytes(*blade.mended_surface))
    m = blade.moments
    row = {"name": blade.name, "status": status, "mass_kg": _finite(m.mass), "cg_radius_m": _finite(m.cg[1])}
    if ops:
        o = ops[0]
        row.update(operating_point=o.name, rpm=_finite(o.rpm), blade_angle_deg=_finite(o.blade_angle_deg),
                   radial_pull_N=_finite(o.radial_pull_N), ctm_Nm=_finite(o.ctm_Nm))
    if status == OUTSIDE:
        row["reason"] = one_line("; ".join(data["comparison"].get("reasons", [])) or "outside limits")
    return row


# --- many jobs ------------------------------------------------------------------------------------


@dataclass(frozen=True)
class BatchResult:
    """Rows in job order, where the summary files went, and the wall time."""

    rows: tuple
    summary_csv: str
    summary_json: str
    seconds: float
    where: str  # "this process", "local cluster (N workers)" or the scheduler address

    @property
    def failures(self) -> list[dict]:
        return [r for r in self.rows if r["status"] not in (OK, OUTSIDE)]

    @property
    def exit_status(self) -> int:
        """0 all done, 1 a check is outside its limits, 2 any bad input or failure."""
        if self.failures:
            return 2
        return 1 if any(r["status"] == OUTSIDE for r in self.rows) else 0


def _local_client(workers: int):
    """A dask Client on a LocalCluster of ``workers`` processes, one thread each."""
    import logging

    from distributed import Client, LocalCluster

    cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None,
                           silence_logs=logging.ERROR)
    return Client(cluster)


def run_batch(inputs, out, *, command: str = "loads", force: bool = False, client=None,
              scheduler: str | None = None, workers: int | None = None, on_done=None,
              connect_timeout_s: float = 15.0) -> BatchResult:
    """Run every job of ``inputs`` (see :func:`collect_jobs`) and write the summaries in ``out``.

    client : a ``distributed.Client`` to use as it is (not closed here); else
    scheduler : address of a running dask scheduler (``tcp://host:8786``; given up after
      ``connect_timeout_s``); else
    workers : local worker processes (default: CPUs, at most one per job; 0 = in this process).
    on_done : optional callable(row, done, total) called as each job finishes.
    """
    from . import report

    if command not in COMMANDS:
        raise InputError("command", f"expected one of {', '.join(COMMANDS)}, got {command!r}")
    t0 = time.perf_counter()
    jobs = collect_jobs(inputs)
    out = os.path.abspath(os.fspath(out))
    if os.path.exists(out) and not os.path.isdir(out):
        raise InputError(out, "exists and is not a folder")
    if not os.path.isdir(os.path.dirname(out)):
        raise InputError(out, f"the folder {os.path.dirname(out)} does not exist")
    csv_path, json_path = os.path.join(out, "summary.csv"), os.path.join(out, "summary.json")
    if os.path.isdir(out):
        for p in (csv_path, json_path):
            report.check_new_output(p, force)
    names = _output_names(jobs)
    opts = [{"command": command, "out": out, "name": n, "force": force} for n in names]

    rows: list[dict | None] = [None] * len(jobs)
    done = 0

    def finished(i, row):
        nonlocal done
        rows[i] = row
        done += 1
        if on_done is not None:
            on_done(row, done, len(jobs))

    own = None
    if client is None and scheduler is None and workers == 0:
        where = "in this process"
        os.makedirs(out, exist_ok=True)
        write_caution_file(out)
        for i, (j, o) in enumerate(zip(jobs, opts)):
            finished(i, run_job(j, o))
    else:
        if client is None:
            if scheduler is not None:
                from distributed import Client

                try:
                    own = client = Client(scheduler, timeout=f"{connect_timeout_s}s")
                except (OSError, TimeoutError, ValueError) as exc:
                    raise InputError(scheduler, f"cannot reach the dask scheduler ({one_line(exc, 200)})") from None
                where = scheduler
            else:
                n = max(1, min(workers or os.cpu_count() or 1, len(jobs)))
                own = client = _local_client(n)
                where = f"local cluster ({n} worker processes)"
        else:
            where = f"dask client ({getattr(client.scheduler, 'address', '?')})"
        try:
            os.makedirs(out, exist_ok=True)  # only once the workers are there to fill it
            write_caution_file(out)
            n_workers = max(1, len(client.scheduler_info().get("workers", {})) or 1)
            threads = max(1, (os.cpu_count() or 1) // n_workers) if own is not None and scheduler is None else None
            from distributed import as_completed

            futures = {}
            for i, (j, o) in enumerate(zip(jobs, opts)):
                f = client.submit(run_job, j, {**o, "numba_threads": threads}, key=f"bladesolid-{i}-{o['name']}",
                                  pure=False)
                futures[f] = i
            for f in as_completed(list(futures)):
                i = futures[f]
                try:
                    row = f.result()
                except Exception as exc:  # the worker died (memory, killed), not the blade
                    row = {c: None for c in COLUMNS}
                    row.update(job=jobs[i], status=FAILED, reason=lost_worker_reason(jobs[i], exc))
                finished(i, row)
        finally:
            if own is not None:
                cluster = getattr(own, "cluster", None)
                own.close()
                if cluster is not None and scheduler is None:
                    cluster.close()
    seconds = time.perf_counter() - t0
    rows = tuple(rows)
    summary = report.header(
        SUMMARY_SCHEMA,
        command=command,
        where=where,
        jobs=len(rows),
        ok=sum(r["status"] == OK for r in rows),
        outside_limits=sum(r["status"] == OUTSIDE for r in rows),
        failed=sum(r["status"] not in (OK, OUTSIDE) for r in rows),
        seconds=seconds,
        columns=list(COLUMNS),
        rows=[{c: r.get(c) for c in COLUMNS} for r in rows],
    )
    report.atomic_write_text(csv_path, report.csv_text(summary["rows"], list(COLUMNS)), force=True)
    report.atomic_write_text(json_path, report.dumps(summary), force=True)
    return BatchResult(rows, csv_path, json_path, seconds, where)
