"""Running a sweep's cases on Dask's distributed scheduler: one task per case, each through
``solver.batch.run_scenario`` (the function behind ``shockslate run``) on a worker.

By default a local cluster of process workers, one per core, each limited to one numba thread so that workers do
not fight over cores; or an existing cluster given by its scheduler address. A task runs into a temporary folder
on its worker and sends the files back, so a remote cluster needs no shared file system. The case's folder is
named by a hash of its scenario, resolution and end time; a case whose summary.json says it came to an end
(finished, diverged, stalled: outcomes a re-run would repeat) is kept on a re-run, so an interrupted sweep resumes
and deleting one case folder reruns only that case. A case that raises is a row with its error, and the other
cases go on. Results are taken in the order they complete (distributed.as_completed), not by polling.
"""
from __future__ import annotations

import json
import os
import re
import sys
import tempfile
import time
import uuid
from contextlib import ExitStack, contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Literal, Optional

from ..scenario import parse_scenario
from .plan import Case, SweepError, SweepPlan
from .tables import DONE_STATUSES, FAILED, NOT_RUN, SweepResult, case_row, columns_of, write_tables

#: How long a sweep waits for the first worker of a cluster, seconds.
WORKER_WAIT_S = 60.0


# ----------------------------------------------------------------------------- one case (runs on a worker)

def run_case(scenario: dict, nx: int, until_s: float, write_fields: bool = False,
             write_pictures: bool = False) -> dict:
    """Run one case through run_scenario in a temporary folder; return its summary and files (name -> bytes).

    Runs on a Dask worker (or in-process): numba is held to one thread for the duration, so that workers sharing
    a machine do not fight over its cores. Any exception becomes {"error": ...} so the sweep goes on.
    """
    import numba

    from ..batch import run_scenario

    before = numba.get_num_threads()
    numba.set_num_threads(1)
    started = time.perf_counter()
    try:
        with tempfile.TemporaryDirectory(prefix="shockslate-case-") as tmp:
            summary = run_scenario(parse_scenario(scenario), tmp, until_s=until_s, nx=nx, progress=None,
                                   write_fields=write_fields, write_pictures=write_pictures)
            files = {p.name: p.read_bytes() for p in sorted(Path(tmp).iterdir())
                     if p.is_file() and p.name != "summary.json"}
        return {"summary": summary, "files": files, "error": None, "host": _host(),
                "wall_s": time.perf_counter() - started}
    except Exception as err:  # noqa: BLE001 - a failing case is a row, not the end of the sweep
        return {"summary": None, "files": {}, "error": f"{type(err).__name__}: {err}", "host": _host(),
                "wall_s": time.perf_counter() - started}
    finally:
        numba.set_num_threads(before)


def _host() -> str:
    import socket

    return f"{socket.gethostname()}:{os.getpid()}"


def _read_done(folder: Path, key: str) -> Optional[dict]:
    """The summary of a case folder that came to an end for this very case, else None."""
    try:
        summary = json.loads((folder / "summary.json").read_text(encoding="utf-8"))
        meta = json.loads((folder / "case.json").read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError):
        return None
    if meta.get("key") != key or summary.get("status") not in DONE_STATUSES:
        return None
    return summary


def _write_case(folder: Path, case: Case, outcome: dict) -> None:
    """Files first, summary.json last (by rename), so a folder with a summary.json is a complete case."""
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "error.json").unlink(missing_ok=True)
    (folder / "summary.json").unlink(missing_ok=True)
    meta = {"key": case.key, "values": case.values, "nx": case.nx, "until_s": case.until_s,
            "ran_on": outcome.get("host"), "scenario": case.scenario}
    (folder / "case.json").write_text(json.dumps(meta, indent=2) + "\n", encoding="utf-8")
    if outcome.get("summary") is None:
        (folder / "error.json").write_text(json.dumps({"error": outcome.get("error")}, indent=2) + "\n",
                                           encoding="utf-8")
        return
    for name, data in outcome["files"].items():
        (folder / name).write_bytes(data)
    tmp = folder / "summary.json.part"
    tmp.write_text(json.dumps(outcome["summary"], indent=2) + "\n", encoding="utf-8")
    tmp.replace(folder / "summary.json")


# ----------------------------------------------------------------------------- running

@dataclass(frozen=True)
class SweepProgress:
    """Counts for the progress line: finished (came to an end), running, failed (diverged, stalled or raised)."""

    total: int
    done: int
    running: int
    failed: int
    reused: int
    elapsed_s: float

    @property
    def waiting(self) -> int:
        return self.total - self.done - self.running


def progress_line(pr: SweepProgress) -> str:
    width = 24
    filled = int(round(width * pr.done / pr.total)) if pr.total else width
    return (f"sweep [{'#' * filled}{'.' * (width - filled)}] {pr.done}/{pr.total} done "
            f"({pr.done - pr.failed} finished, {pr.failed} failed, {pr.reused} kept from before), "
            f"{pr.running} running, {max(pr.waiting, 0)} waiting  {pr.elapsed_s:.0f} s")


class ProgressPrinter:
    """Default progress: on a terminal one line on stderr rewritten in place; in a log a new line only when the
    counts change."""

    def __init__(self, stream=None) -> None:
        self.stream = stream or sys.stderr
        self.last: Optional[tuple[int, int, int]] = None

    def __call__(self, pr: SweepProgress) -> None:
        tty = getattr(self.stream, "isatty", lambda: False)()
        counts = (pr.done, pr.running, pr.failed)
        if tty:
            self.stream.write("\r" + progress_line(pr) + "  " + ("\n" if pr.done >= pr.total else ""))
        elif counts != self.last:
            self.stream.write(progress_line(pr) + "\n")
        self.last = counts
        self.stream.flush()


def print_progress(pr: SweepProgress) -> None:
    """The progress line on stderr (see ProgressPrinter); run_sweep makes a fresh printer per sweep."""
    ProgressPrinter()(pr)


def worker_environment() -> dict[str, str]:
    """Environment of a local worker: numba held to one thread, and the JIT cache of this process."""
    env = {"NUMBA_NUM_THREADS": "1", "OMP_NUM_THREADS": "1"}
    cache_dir = os.environ.get("NUMBA_CACHE_DIR")
    if not cache_dir:
        import numba

        cache_dir = numba.config.CACHE_DIR or ""
    if cache_dir:
        env["NUMBA_CACHE_DIR"] = str(Path(cache_dir).resolve())
    return env


@contextmanager
def kept_environ():
    """Put os.environ back as it was: a Nanny writes the variables of its workers into this process before it
    spawns them (distributed's pre-spawn environment)."""
    saved = dict(os.environ)
    try:
        yield
    finally:
        if dict(os.environ) != saved:
            os.environ.clear()
            os.environ.update(saved)


def local_cluster(workers: int | None = None):
    """A distributed.LocalCluster of process workers (default: one per core), one thread each, numba held to one
    thread and pointed at the same JIT cache as this process.

    The variables are given as the pre-spawn environment, so they are set before the worker process starts:
    numba reads NUMBA_NUM_THREADS and NUMBA_CACHE_DIR once, at import, and a spawned worker may import it early
    (it re-imports the main module of this process). This process's own environment is left as it was.
    """
    import logging

    import dask
    from distributed import LocalCluster

    n = int(workers) if workers else (len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity")
                                      else (os.cpu_count() or 1))
    env = worker_environment()
    pre_spawn = {**(dask.config.get("distributed.nanny.pre-spawn-environ", default={}) or {}), **env}
    with kept_environ(), dask.config.set({"distributed.nanny.pre-spawn-environ": pre_spawn}):
        # no dashboard; the scheduler's small HTTP server on a free loopback port rather than on 8787
        return LocalCluster(n_workers=n, threads_per_worker=1, processes=True, host="127.0.0.1",
                            dashboard_address="127.0.0.1:0", scheduler_kwargs={"dashboard": False},
                            silence_logs=logging.ERROR, env=env)


def check_scheduler_address(address: str) -> str:
    if not re.fullmatch(r"(tcp|tls)://[^\s/:]+:\d{1,5}", address or ""):
        raise SweepError(f"--scheduler = {address!r} is not allowed: give the scheduler's address as "
                         "tcp://HOST:PORT (or tls://HOST:PORT)")
    return address


def run_sweep(plan: SweepPlan, out_dir: str | Path, *, scheduler: str | None = None, workers: int | None = None,
              client: Any = None, write_fields: bool = False, write_pictures: bool = False,
              progress: Callable[[SweepProgress], None] | None | Literal["default"] = "default",
              announce: Callable[[str], None] | None = None,
              write_report: bool = True) -> SweepResult:
    """Run every case not already done in out_dir and write sweep.csv, sweep.json and sweep_report.html.

    Where it runs: `client` (a distributed.Client, left open), else `scheduler` (address of an existing cluster),
    else a local cluster of `workers` process workers (default: one per core) started and closed here. Nothing is
    started when every case is already done. announce(text) is told where the cases go; progress(SweepProgress)
    once the cases are submitted and each time one ends. Ctrl+C cancels what is left; the tables are still
    written, with those cases as "not run".
    """
    out = Path(out_dir)
    if progress == "default":
        progress = ProgressPrinter()
    say = announce or (lambda text: None)
    started = time.perf_counter()
    summaries: dict[str, Optional[dict]] = {}
    errors: dict[str, str] = {}
    statuses: dict[str, str] = {}
    unique: dict[str, Case] = {}
    for case in plan.cases:
        unique.setdefault(case.key, case)
    reused_keys: set[str] = set()
    ran_keys: set[str] = set()
    for key, case in unique.items():
        summary = _read_done(out / case.folder, key)
        if summary is not None:
            summaries[key] = summary
            statuses[key] = summary["status"]
            errors[key] = summary.get("message") or ""
            reused_keys.add(key)
    pending = [c for k, c in unique.items() if k not in reused_keys]
    result = SweepResult(out, plan, [], [], reused=[c.index for c in plan.cases if c.key in reused_keys])

    def report_progress(running: int) -> None:
        if progress is None:
            return
        done = len(statuses)
        failed = sum(1 for s in statuses.values() if s != "finished")
        progress(SweepProgress(len(unique), done, min(running, len(unique) - done), failed, len(reused_keys),
                               time.perf_counter() - started))

    if not pending:
        result.where = "nothing to run"
        say(f"sweep: all {len(unique)} cases are already done in {out}; writing the tables")
    else:
        from distributed import Client, as_completed

        with ExitStack() as stack:
            if client is not None:
                result.where = f"the given cluster at {client.scheduler.address}"
            elif scheduler is not None:
                address = check_scheduler_address(scheduler)
                try:
                    client = stack.enter_context(Client(address, timeout="15s"))
                except (OSError, TimeoutError) as err:
                    raise SweepError(f"--scheduler = {address!r}: cannot reach a scheduler there ({err})") from None
                result.where = f"the existing cluster at {address}"
            else:
                stack.enter_context(kept_environ())  # a worker restarted by its Nanny writes it again
                cluster = stack.enter_context(local_cluster(workers))
                client = stack.enter_context(Client(cluster))
                result.where = f"a local cluster of {len(cluster.workers)} process workers, one numba thread each"
            try:
                client.wait_for_workers(1, timeout=WORKER_WAIT_S)
            except TimeoutError:
                raise SweepError(f"no worker joined {result.where} within {WORKER_WAIT_S:g} s; start one with "
                                 "`dask worker SCHEDULER_ADDRESS --nthreads 1`") from None
            threads = client.nthreads()
            out.mkdir(parents=True, exist_ok=True)
            say(f"sweep: {len(unique)} cases, {len(reused_keys)} kept from before, {len(pending)} to run on "
                f"{result.where} ({len(threads)} workers, {sum(threads.values())} threads)")
            token = uuid.uuid4().hex[:8]
            futures = {client.submit(run_case, c.scenario, c.nx, c.until_s, write_fields, write_pictures,
                                     key=f"shockslate-case-{c.key[:16]}-{token}", pure=False): c for c in pending}
            remaining = set(futures)
            report_progress(_running(client, remaining, threads))
            try:
                for fut in as_completed(futures):  # in the order the cases end; no polling
                    remaining.discard(fut)
                    case = futures[fut]
                    outcome = _outcome(fut)
                    _write_case(out / case.folder, case, outcome)
                    summary = outcome.get("summary")
                    summaries[case.key] = summary
                    statuses[case.key] = summary["status"] if summary else FAILED
                    errors[case.key] = (summary.get("message") or "") if summary else outcome.get("error", "")
                    ran_keys.add(case.key)
                    report_progress(_running(client, remaining, threads))
            except KeyboardInterrupt:
                result.interrupted = True
                client.cancel(list(remaining))
    result.ran = [c.index for c in plan.cases if c.key in ran_keys]
    for case in plan.cases:
        status = statuses.get(case.key, NOT_RUN)
        result.rows.append(case_row(case, status, errors.get(case.key, ""), summaries.get(case.key)))
    result.columns = columns_of(result.rows, [v.path for v in plan.varies])
    out.mkdir(parents=True, exist_ok=True)
    write_tables(result)
    if write_report:
        from .report import write_sweep_report

        write_sweep_report(out / "sweep_report.html", result)
    return result


def _outcome(fut) -> dict:
    """The task's result, or a failed outcome naming why the cluster could not run it."""
    if fut.status == "finished":
        return fut.result()
    if fut.status == "cancelled":
        return {"summary": None, "files": {}, "error": "cancelled: the cluster dropped the task"}
    try:
        exc = fut.exception()
    except Exception as err:  # noqa: BLE001
        exc = err
    return {"summary": None, "files": {}, "error": f"{type(exc).__name__}: {exc}"}


def _running(client, remaining: set, threads: dict[str, int]) -> int:
    """Cases of ours being worked on: per worker, our tasks assigned to it, up to its thread count."""
    ours = {f.key for f in remaining}
    try:
        processing = client.processing()
    except Exception:  # noqa: BLE001 - the count is only for the progress line
        return min(len(remaining), sum(threads.values()))
    return sum(min(sum(1 for k in keys if k in ours), threads.get(w, 1)) for w, keys in processing.items())


