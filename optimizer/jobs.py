"""The nightly job: ingest → fit → gate → recommend → publish, unattended, for years.

``run_nightly`` composes the steps and records the run in the store. It holds a lock so
two runs never overlap, is idempotent (a second run on the same data changes nothing),
isolates failures per line × product, keeps the last good model and recommendations in
place when anything fails, and tells someone (alerts in the store and the summary, and an
optional hook command that receives them as JSON on stdin).

Exit codes: 0 all good; 3 finished with warnings; 4 failed (some step or group could not
be completed; the others were); 5 another run holds the lock.
"""
from __future__ import annotations

import datetime as dt
import fcntl
import json
import logging
import os
import shlex
import subprocess
import time
import zlib
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from .config import Plant
from .errors import BeltwaveError, StoreError

log = logging.getLogger(__name__)

EXIT_OK, EXIT_WARNINGS, EXIT_FAILED, EXIT_LOCKED = 0, 3, 4, 5
RECENT_DAYS = 14.0  # what "recent practice" and "products run recently" look back over [d]
SCATTER_BYTES = 1_000_000  # task arguments larger than this travel to a Dask cluster on their own


class LockHeld(BeltwaveError):
    """Another nightly run holds the lock."""


@dataclass
class NightlyResult:
    exit_code: int
    status: str  # ok | warning | failed | locked | dry-run
    summary: dict = field(default_factory=dict)
    lines: list[str] = field(default_factory=list)  # one-line summary per line


def plant_paths(plant: Plant) -> dict[str, Path]:
    """Lock and log files: from ``[nightly]`` or beside the SQLite store (else the config's folder)."""
    nightly = plant.sections.get("nightly", {})
    base = plant.source.parent
    if plant.store_url.startswith("sqlite:///"):
        base = Path(plant.store_url[len("sqlite:///"):]).parent
    resolve = lambda key, default: (plant.source.parent / nightly[key]).resolve() if key in nightly else base / default  # noqa: E731
    return {"lock": resolve("lock_file", "nightly.lock"), "log": resolve("log_file", "nightly.log")}


@contextmanager
def exclusive_lock(path: Path):
    """A non-blocking exclusive lock on ``path`` (released when the process ends, even by SIGKILL)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fh = open(path, "a+")
    try:
        fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
    except BlockingIOError:
        fh.close()
        raise LockHeld(f"another nightly run holds the lock {path}; this run did nothing") from None
    try:
        fh.seek(0)
        fh.truncate()
        fh.write(f"{os.getpid()}\n")
        fh.flush()
        yield
    finally:
        fcntl.flock(fh.fileno(), fcntl.LOCK_UN)
        fh.close()


class _Deferred:
    """A task of the serial executor: run in this process when its result is first asked for."""

    def __init__(self, fn, args):
        self._fn, self._args, self._done, self._value = fn, args, False, None

    def result(self):
        if not self._done:
            self._value, self._done, self._args = self._fn(*self._args), True, None
        return self._value


class SerialExecutor:
    """Runs tasks one after another in this process, each when its result is asked for (so the
    nightly's steps follow each other and their times are their own)."""

    name = "serial"

    def submit(self, fn, *args):
        return _Deferred(fn, args)

    def as_completed(self, handles):
        return iter(list(handles))

    def map(self, fn, *iterables):
        return [fn(*args) for args in zip(*iterables)]

    def close(self):
        return None


class DaskExecutor:
    """Runs tasks on Dask distributed: an existing scheduler, or a local cluster of ``workers``."""

    def __init__(self, scheduler: str | None = None, workers: int | None = None):
        from dask.distributed import Client, LocalCluster

        self.cluster = None
        if scheduler:
            self.client = Client(scheduler)
            self.name = f"dask {scheduler}"
        else:
            self.cluster = LocalCluster(n_workers=workers or 2, threads_per_worker=1, dashboard_address=None,
                                        host="127.0.0.1", processes=True)
            self.client = Client(self.cluster)
            self.name = f"dask local cluster of {workers or 2}"

    def submit(self, fn, *args):
        # tasks come wrapped by _safe: a failing group returns a _Failure instead of raising;
        # a line's samples go to the cluster as data of their own (scatter), not inside the task
        args = [self.client.scatter(a) if isinstance(a, pd.DataFrame) and a.memory_usage().sum() > SCATTER_BYTES
                else a for a in args]
        return self.client.submit(fn, *args, pure=False)

    def as_completed(self, handles):
        from dask.distributed import as_completed

        return as_completed(list(handles))

    def map(self, fn, *iterables):
        return self.client.gather(self.client.map(fn, *iterables, pure=False))

    def close(self):
        self.client.close()
        if self.cluster is not None:
            self.cluster.close()


@dataclass
class _Failure:
    error: BaseException


def _safe(fn):
    """Wrap a task so that an exception comes back as a value (one group's failure stops no other)."""
    def run(*args):
        try:
            return fn(*args)
        except Exception as exc:  # noqa: BLE001 - reported per group, never swallowed
            log.exception("task failed")
            return _Failure(exc)
    run.__name__ = fn.__name__
    return run


def _seed(*parts) -> int:
    """A seed that is the same in every process for the same inputs (Python's hash is not)."""
    return zlib.crc32("|".join(map(str, parts)).encode())


def recommend_task(plant: Plant, line_id: str, product_id: str, fitted, recent, entry, plan_date: str):
    """One robust recommendation as a plain-JSON record (pure; runs on a worker when scaled out)."""
    from .recommend import recommend, recommend_arguments, recommend_options

    line, product = plant.line(line_id), plant.product(product_id)
    conditions = {}
    if entry is not None:
        if entry.expected_infeed_temp_c is not None:
            conditions["infeed_temp_c"] = entry.expected_infeed_temp_c
        if entry.expected_belt_load_kg_per_m is not None:
            conditions["belt_load_kg_per_m"] = entry.expected_belt_load_kg_per_m
    rec = recommend(line, product, fitted, conditions=conditions or None, recent_practice=recent,
                    economics=plant.economics,
                    planned_tonnes_per_day=entry.planned_tonnes if entry else None,
                    planned_hours_per_day=entry.planned_hours if entry else None,
                    rng=np.random.default_rng(_seed(line_id, product_id, plan_date, fitted.version_id)),
                    **recommend_arguments(recommend_options(plant)))
    return rec.to_json()


def _fit_task(plant, line_id, products, samples, qa, incumbents):
    """A line's fit report and the seconds the fit took where it ran (for the next run's order)."""
    from .train import fit_task

    t0 = time.perf_counter()
    report = fit_task(plant, line_id, products, samples, qa, incumbents)
    return report, time.perf_counter() - t0


def longest_first(store, line_ids: list[str]) -> list[str]:
    """The lines to fit, the slowest first by the newest finished run that timed them.

    With fewer workers than lines, a slow fit started last keeps one worker busy while the
    others wait (and its line's recommendations after it): starting the longest first is the
    classic list-scheduling rule. Lines never timed (a first fit, the slowest) lead; ties keep
    the plant's order.
    """
    known: dict[str, float] = {}
    runs = store.job_runs(kind="nightly", limit=20)
    for summary in runs["summary"] if not runs.empty else []:
        for lid, secs in ((summary.get("steps") or {}).get("fit") or {}).get("seconds_by_line", {}).items():
            known.setdefault(lid, float(secs))
    order = {lid: i for i, lid in enumerate(line_ids)}
    return sorted(line_ids, key=lambda lid: (-known.get(lid, float("inf")), order[lid]))


def recent_samples(store, line_id: str, product_id: str) -> pd.DataFrame:
    """The product's samples of the RECENT_DAYS days before its newest sample on the line
    (read from the store for that window only: a year of history is not loaded for it)."""
    lots = store.lots(line_id, product_id)
    if lots.empty:  # samples without lots: the line's newest sample bounds the window
        newest = store.newest_sample_utc(line_id)
    else:
        newest = pd.Timestamp(pd.to_datetime(lots["last_utc"], utc=True).max())
    if newest is None:
        return store.samples(line_id, product_id)
    samples = store.samples(line_id, product_id, start=newest - pd.Timedelta(days=RECENT_DAYS))
    if samples.empty:
        return samples
    newest = samples["timestamp_utc"].max()  # the product's own newest sample
    return samples[samples["timestamp_utc"] >= newest - pd.Timedelta(days=RECENT_DAYS)]


def _products_to_plan(plant: Plant, store, plan, plan_date: str):
    """(line_id, product_id, plan entry) for the day: the plan's rows, else products run recently."""
    if plan is not None:
        return [(e.line_id, e.product_id, e) for e in plan if e.date.isoformat() == plan_date]
    out = []
    lots = store.lots()
    for line_id, line in plant.lines.items():
        mine = lots[lots["line_id"] == line_id] if not lots.empty else lots
        if mine.empty:
            continue
        newest = pd.to_datetime(mine["last_utc"], utc=True).max()
        recent = mine[pd.to_datetime(mine["last_utc"], utc=True) >= newest - pd.Timedelta(days=RECENT_DAYS / 2)]
        for pid in line.products:
            if pid in set(recent["product_id"]):
                out.append((line_id, pid, None))
    return out


def run_nightly(plant: Plant, *, plan_path: str | None = None, plan_date: str | None = None, dry_run: bool = False,
                executor=None, now: dt.datetime | None = None) -> NightlyResult:
    """Run the whole nightly job once; see the module notes for exit codes."""
    paths = plant_paths(plant)
    _configure_log_file(paths["log"])
    try:
        with exclusive_lock(paths["lock"]):
            return _run_locked(plant, plan_path, plan_date, dry_run, executor or SerialExecutor(), now)
    except LockHeld as exc:
        log.warning("%s", exc)
        return NightlyResult(EXIT_LOCKED, "locked", {"error": str(exc)}, [str(exc)])


def _configure_log_file(path: Path):
    root = logging.getLogger("optimizer")
    if any(isinstance(h, logging.FileHandler) and Path(h.baseFilename) == path for h in root.handlers):
        return
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        handler = logging.FileHandler(path)
    except OSError as exc:
        log.warning("cannot write the log file %s: %s", path, exc)
        return
    handler.setFormatter(logging.Formatter("%(asctime)s %(levelname)s %(name)s: %(message)s"))
    root.addHandler(handler)
    if root.level == logging.NOTSET or root.level > logging.INFO:
        root.setLevel(logging.INFO)


def _run_locked(plant, plan_path, plan_date, dry_run, executor, now) -> NightlyResult:
    from .ingest import find_log_files, ingest_paths
    from .recommend import export_recommendations, read_plan, recent_practice_from_samples
    from .store import Store
    from .train import load_active_model, record_fits, train_inputs

    t_start = time.perf_counter()
    now = now or dt.datetime.now(dt.timezone.utc)
    plan_date = plan_date or now.date().isoformat()
    plan = read_plan(plan_path, plant) if plan_path else None
    if dry_run:
        return _dry_run(plant, plan, plan_date, find_log_files)
    try:
        store = Store.open(plant.store_url)
    except StoreError as exc:
        msg = f"cannot open the store for writing: {exc}; nothing was changed"
        log.error(msg)
        return NightlyResult(EXIT_FAILED, "failed", {"error": msg}, [msg])
    summary = {"plan_date": plan_date, "steps": {}, "warnings": [], "errors": [], "executor": executor.name}
    alerts: list[dict] = []
    run_id = None
    try:
        stale = store.job_runs(kind="nightly")
        for r in stale[stale["status"] == "running"].itertuples() if not stale.empty else []:
            store.finish_job_run(int(r.id), "failed", {"error": "interrupted (the process ended before finishing)"})
            summary["warnings"].append(f"run {r.id} had been interrupted; marked failed")
        run_id = store.start_job_run("nightly")
        # 1. ingest
        t0 = time.perf_counter()
        reports = ingest_paths(plant, store, plant.incoming_dirs)
        new_rows = {}
        for rep in reports:
            if rep.status == "rejected":
                summary["warnings"].append(f"{rep.path}: {rep.error}")
            elif rep.quarantined_total:
                summary["warnings"].append(f"{Path(rep.path).name}: {rep.quarantined_total} row(s) set aside "
                                           f"({', '.join(f'{k} {v}' for k, v in rep.quarantined.items())})")
            if rep.status == "ingested" and rep.kind == "process":
                for lid in rep.line_ids:
                    new_rows[lid] = new_rows.get(lid, 0) + rep.accepted
        summary["steps"]["ingest"] = {"files": len(reports), "ingested": sum(r.status == "ingested" for r in reports),
                                      "skipped": sum(r.status == "already_ingested" for r in reports),
                                      "rejected": sum(r.status == "rejected" for r in reports),
                                      "rows_accepted": sum(r.accepted for r in reports), "seconds": time.perf_counter() - t0}
        have = set(store.lines_with_samples())
        for lid in plant.lines:
            if lid in have and not new_rows.get(lid):
                alerts.append({"kind": "no_new_data", "line_id": lid,
                               "message": f"line {lid}: no new data in this run; check the historian export"})
        # 2 and 3, pipelined: fit and gate the lines with new data (idempotent), and start a
        # line's recommendations for the day's plan as soon as its models are recorded, so that
        # a parallel executor keeps every worker busy; the serial one runs them in order
        t0 = time.perf_counter()
        fit_lines = [lid for lid in plant.lines if new_rows.get(lid) and lid in have]
        parallel = not isinstance(executor, SerialExecutor)
        submit_order = longest_first(store, fit_lines) if parallel else fit_lines
        groups = _products_to_plan(plant, store, plan, plan_date)
        existing = store.recommendations(date=plan_date)
        incumbents, fit_jobs = {}, {}
        for lid in submit_order:
            products = list(plant.line(lid).products)
            samples, qa, incumbents[lid] = train_inputs(plant, store, lid, products)
            fit_jobs[executor.submit(_safe(_fit_task), plant, lid, products, samples, qa, incumbents[lid])] = lid
            del samples, qa
        rec_jobs: dict = {}  # (line, product) -> (plan entry, model, handle)
        t_rec, prep_s = None, 0.0  # first recommendation submitted; time spent preparing them here
        fit_seconds: dict[str, float] = {}

        def submit_recommendations(lid):
            nonlocal t_rec, prep_s
            t_prep = time.perf_counter()
            for g_lid, pid, entry in groups:
                if g_lid != lid:
                    continue
                model = load_active_model(plant, store, lid, pid)
                same = existing[(existing["line_id"] == lid) & (existing["product_id"] == pid)] \
                    if not existing.empty else existing
                if not same.empty and (same["model_version_id"].iloc[-1] == model.version_id or
                                       (pd.isna(same["model_version_id"].iloc[-1]) and model.version_id is None)):
                    continue  # already recommended today with this model: nothing changes
                samples = recent_samples(store, lid, pid)
                recent = (recent_practice_from_samples(samples, plant.line(lid), plant.product(pid))
                          if len(samples) else None)
                t_rec = t_rec or time.perf_counter()
                rec_jobs[(lid, pid)] = (entry, model, executor.submit(_safe(recommend_task), plant, lid, pid, model,
                                                                      recent, entry, plan_date))
            prep_s += time.perf_counter() - t_prep

        for lid in plant.lines:
            if lid not in fit_lines:
                submit_recommendations(lid)
        by_fit: dict = {}  # line -> (decisions, alerts, error), reported in the plant's line order
        for handle in executor.as_completed(fit_jobs):
            lid, res = fit_jobs[handle], handle.result()
            if isinstance(res, _Failure):
                by_fit[lid] = ([], [], f"fit of line {lid} failed: {res.error}; its active models stay")
            else:
                report, fit_seconds[lid] = res
                by_fit[lid] = (*record_fits(plant, store, report, incumbents[lid]), None)
            submit_recommendations(lid)
        decisions = []
        for lid in fit_lines:
            d, a, error = by_fit[lid]
            decisions += d
            alerts += a
            if error:
                summary["errors"].append(error)
        # serial: the steps follow each other (the recommendations' preparation, done while the
        # fits are recorded, counts as recommending); parallel: they overlap, each time running
        # from its step's first task
        summary["steps"]["fit"] = {"lines": fit_lines, "decisions": [d.to_json() for d in decisions],
                                   "seconds_by_line": {lid: round(fit_seconds[lid], 3) for lid in fit_lines
                                                       if lid in fit_seconds},
                                   "seconds": time.perf_counter() - t0 - (0.0 if parallel else prep_s)}
        # 3. the recommendations, gathered in the plan's order
        t3 = time.perf_counter()
        t_rec = t_rec if (parallel and t_rec is not None) else t3
        todo = [(lid, pid, rec_jobs[(lid, pid)][0]) for lid, pid, _ in groups if (lid, pid) in rec_jobs]
        fitted = [rec_jobs[(lid, pid)][1] for lid, pid, _ in todo]
        results = [rec_jobs[(lid, pid)][2].result() for lid, pid, _ in todo]
        records = []
        for (lid, pid, _), model, res in zip(todo, fitted, results):
            if isinstance(res, _Failure):
                summary["errors"].append(f"recommendation for {lid} × {pid} failed: {res.error}; yesterday's stays")
                continue
            records.append({"line_id": lid, "product_id": pid, "payload": res, "model_version_id": model.version_id})
            if not res.get("feasible"):
                info = res.get("infeasible") or {}
                alerts.append({"kind": "infeasible", "line_id": lid, "product_id": pid,
                               "message": f"{lid} × {pid}: no setting meets every target "
                                          f"({info.get('message', 'see the recommendation')})"})
        if records:
            store.add_recommendations(records, run_id=run_id, plan_date=plan_date)
        day = store.recommendations(date=plan_date)
        exported = None
        if not day.empty:
            latest = day.sort_values("id").groupby(["line_id", "product_id"]).tail(1)
            exported = [str(p) for p in export_recommendations(list(latest["payload"]), plant.export_dir, plan_date)]
        by_line = {}
        for r in records:
            by_line[r["line_id"]] = by_line.get(r["line_id"], 0) + 1
        summary["steps"]["recommend"] = {"groups": len(groups), "new": len(records), "exported": exported,
                                         "by_line": by_line,
                                         "seconds": time.perf_counter() - t_rec + (0.0 if parallel else prep_s)}
        # 4. alerts
        if alerts:
            store.add_alerts(alerts, run_id=run_id)
            _hook(plant, alerts, summary)
        summary["alerts"] = alerts
        summary["seconds"] = time.perf_counter() - t_start
        status = "failed" if summary["errors"] else ("warning" if summary["warnings"] or alerts else "ok")
        store.finish_job_run(run_id, status, summary)
        return NightlyResult({"ok": EXIT_OK, "warning": EXIT_WARNINGS, "failed": EXIT_FAILED}[status], status,
                             summary, _line_summaries(plant, summary, alerts))
    except Exception as exc:  # the run's own failure: record it, keep everything stored before
        log.exception("nightly run failed")
        summary["errors"].append(f"the run stopped: {exc}")
        if run_id is not None:
            try:
                store.finish_job_run(run_id, "failed", summary)
            except Exception:  # noqa: BLE001 - the store itself may be what failed
                log.exception("could not record the failed run")
        return NightlyResult(EXIT_FAILED, "failed", summary, [f"nightly run failed: {exc}"])
    finally:
        store.close()


def _line_summaries(plant, summary, alerts) -> list[str]:
    fitted = {}
    for d in summary["steps"].get("fit", {}).get("decisions", []):
        fitted.setdefault(d["line_id"], []).append(d)
    new_recs = summary["steps"].get("recommend", {}).get("by_line", {})
    out = []
    for lid in plant.lines:
        ds = fitted.get(lid, [])
        n_fit = sum(d["status"] == "fitted" for d in ds)
        promoted = sum(d["promoted"] for d in ds)
        cold = sum(d["status"] == "cold_start" for d in ds)
        n_alerts = sum(a.get("line_id") == lid for a in alerts)
        out.append(f"{lid}: {n_fit} model(s) fitted, {promoted} promoted, {cold} on cold start; "
                   f"{new_recs.get(lid, 0)} new recommendation(s); {n_alerts} alert(s)")
    return out


def _hook(plant: Plant, alerts: list[dict], summary: dict):
    command = plant.sections.get("alerts", {}).get("hook_command")
    if not command:
        return
    try:
        subprocess.run(shlex.split(command), input=json.dumps(alerts), text=True, timeout=60, check=True,
                       capture_output=True)
    except (OSError, subprocess.SubprocessError) as exc:
        summary["warnings"].append(f"the alert hook '{command}' failed: {exc}")


def _dry_run(plant, plan, plan_date, find_log_files) -> NightlyResult:
    files, missing = find_log_files(plant.incoming_dirs)
    lines = [f"would read {len(files)} file(s) from {', '.join(map(str, plant.incoming_dirs)) or 'no incoming folder'}"
             " (files already ingested are skipped by content hash)"]
    lines += [f"missing incoming folder: {m}" for m in missing]
    lines.append(f"would refit the lines with new data, gate, and recommend for {plan_date} "
                 + (f"from the plan ({len(plan)} rows)" if plan else "for the products run recently"))
    lines.append(f"would export to {plant.export_dir}; store {plant.store_url}")
    return NightlyResult(EXIT_OK, "dry-run", {"files": [str(f) for f in files]}, lines)
