"""Cohorts: many subjects through the same pipeline, resumable, isolated, local or on Dask.

A cohort is a TOML file (``[cohort]``, shared step settings under ``[shared.*]``,
and ``[[subjects]]`` naming a recipe or giving inputs inline) or a folder of
``sub-*`` subject folders. Each subject runs :func:`prep.pipeline.prepare_subject`
with a :class:`~prep.stepcache.StepCache` in its own work folder, so a rerun
skips finished steps and resumes after a crash. A bad subject is recorded with
its finding codes or error and never stops the others.

Tasks are plain functions of plain data (:func:`run_subject_task`), so the same
task runs serially, in local processes or on Dask workers.
"""
from __future__ import annotations

import contextlib
import copy
import csv
import fcntl
import html
import io
import json
import os
import tomllib
import traceback
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .atomic import write_text_atomic
from .errors import HeadprepError, PluginError, UsageError

__all__ = ["Cohort", "SubjectTask", "load_cohort", "run_subject_task", "run_cohort", "write_cohort_tables",
           "work_lock"]

RECIPE_SECTIONS = ("align", "patches", "head_model", "forward", "checks", "output")
COHORT_KEYS = {"name", "work", "out"}


@dataclass(frozen=True)
class SubjectTask:
    """One subject's job: a complete recipe mapping and where to work (plain data, picklable)."""

    subject: str
    recipe: dict[str, Any]
    base: str
    bundle: str
    work: str


@dataclass(frozen=True)
class Cohort:
    name: str
    source: Path
    work: Path
    out: Path
    tasks: tuple[SubjectTask, ...]


def _merge(shared: Mapping[str, Any], own: Mapping[str, Any]) -> dict[str, Any]:
    out = copy.deepcopy(dict(shared))
    for k, v in own.items():
        out[k] = _merge(out[k], v) if isinstance(v, Mapping) and isinstance(out.get(k), Mapping) else v
    return out


def _scan_folder(folder: Path) -> list[tuple[dict[str, Any], Path]]:
    """Subjects of a BIDS-like folder: ``sub-*/recipe.toml``, or standard file names inside ``sub-*``."""
    found = []
    for sub in sorted(p for p in folder.glob("sub-*") if p.is_dir()):
        rec = sub / "recipe.toml"
        if rec.is_file():
            try:
                found.append((tomllib.loads(rec.read_text(encoding="utf-8")), sub))
            except tomllib.TOMLDecodeError as exc:
                raise UsageError(f"{rec}: not valid TOML: {exc}") from exc
            continue

        def one(pattern: str) -> str | None:
            hits = sorted(sub.glob(pattern))
            return hits[0].name if hits else None

        inputs = {"sensors": one("*_electrodes.tsv") or one("*electrodes*.*"), "scalp": one("scalp.*"),
                  "outer_skull": one("outer_skull.*"), "inner_skull": one("inner_skull.*"),
                  "headshape": one("*_headshape.tsv"), "fiducials": one("*fiducials*.tsv"),
                  "cortex": [n for n in (one("cortex_left.*"), one("cortex_right.*")) if n] or one("cortex.*")}
        inputs = {k: v for k, v in inputs.items() if v}
        found.append(({"subject": {"id": sub.name}, "inputs": inputs}, sub))
    if not found:
        raise UsageError(f"{folder}: no subject folders (sub-*) found")
    return found


def load_cohort(path: str | os.PathLike[str], *, work: str | None = None, out: str | None = None) -> Cohort:
    """Read a cohort TOML file or scan a folder of subjects.

    Raises
    ------
    UsageError
        Naming the file and key (unknown section or key, missing subjects, duplicates).
    """
    p = Path(path)
    if p.is_dir():
        entries = _scan_folder(p)
        shared: dict[str, Any] = {}
        cfg: dict[str, Any] = {}
        base_dir = p
    elif p.is_file():
        try:
            doc = tomllib.loads(p.read_text(encoding="utf-8"))
        except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
            raise UsageError(f"{p}: not valid TOML: {exc}") from exc
        for key in doc:
            if key not in ("cohort", "shared", "subjects"):
                raise UsageError(f"{p}: unknown section [{key}] (known: cohort, shared, subjects)")
        cfg = doc.get("cohort", {})
        for key in cfg:
            if key not in COHORT_KEYS:
                raise UsageError(f"{p}: [cohort] unknown key '{key}' (known: {', '.join(sorted(COHORT_KEYS))})")
        shared = doc.get("shared", {})
        for key in shared:
            if key not in RECIPE_SECTIONS:
                raise UsageError(f"{p}: [shared.{key}] is not a step section (known: {', '.join(RECIPE_SECTIONS)})")
        subjects = doc.get("subjects")
        if not isinstance(subjects, list) or not subjects:
            raise UsageError(f"{p}: no [[subjects]] listed")
        entries = []
        for i, s in enumerate(subjects, 1):
            if "recipe" in s:
                rec = (p.parent / s["recipe"]).resolve()
                if not rec.is_file():
                    raise UsageError(f"{p}: subject {i}: recipe {rec} not found")
                try:
                    entries.append((tomllib.loads(rec.read_text(encoding="utf-8")), rec.parent))
                except tomllib.TOMLDecodeError as exc:
                    raise UsageError(f"{rec}: not valid TOML: {exc}") from exc
            elif "id" in s and "inputs" in s:
                own = {k: v for k, v in s.items() if k != "id"}
                entries.append(({"subject": {"id": s["id"]}, **own}, p.parent))
            else:
                raise UsageError(f"{p}: subject {i} needs either 'recipe' or both 'id' and [subjects.inputs]")
        base_dir = p.parent
    else:
        raise UsageError(f"{p}: cohort file or folder not found")
    # options are relative to where the user stands; the cohort file's own paths to the file
    work_dir = (Path(work) if work else base_dir / cfg.get("work", "headprep-work")).resolve()
    out_dir = (Path(out) if out else base_dir / cfg.get("out", "headprep-bundles")).resolve()
    tasks, seen = [], set()
    for recipe, base in entries:
        merged = _merge(shared, recipe)
        sid = str(merged.get("subject", {}).get("id", "")).strip()
        if not sid:
            raise UsageError(f"{p}: a subject has no id ({base})")
        if sid in seen:
            raise UsageError(f"{p}: subject id '{sid}' appears twice")
        seen.add(sid)
        merged.pop("output", None)  # the cohort decides where bundles go
        tasks.append(SubjectTask(subject=sid, recipe=merged, base=str(base), bundle=str(out_dir / f"{sid}-forward"),
                                 work=str(work_dir / sid)))
    return Cohort(name=str(cfg.get("name", p.stem)), source=p, work=work_dir, out=out_dir, tasks=tuple(tasks))


# ------------------------------------------------------------------ one subject (runs anywhere)
def run_subject_task(task: SubjectTask, *, report: bool = True) -> dict[str, Any]:
    """Prepare one subject; never raises for a subject's own problem.

    Returns
    -------
    dict
        ``subject``, ``status`` (``done`` | ``unusable`` | ``error``), ``verdict``,
        ``summary``, ``codes`` (finding codes), ``error`` (one line), ``steps_computed``,
        ``steps_reused``, ``bundle``, ``array_sha256`` (for comparing runs).
    """
    from threadpoolctl import threadpool_limits

    from .pipeline import prepare_subject
    from .recipe import recipe_from_mapping
    from .registry import make_registry
    from .stepcache import StepCache

    work = Path(task.work)
    work.mkdir(parents=True, exist_ok=True)
    cache = StepCache(work / "steps")
    result: dict[str, Any] = {"subject": task.subject, "bundle": task.bundle, "status": "error", "verdict": None,
                              "summary": {}, "codes": [], "error": None}
    try:
        with _subject_lock(work, task.subject), threadpool_limits(limits=1):
            recipe = recipe_from_mapping(task.recipe, path=None, base=Path(task.base))
            res = prepare_subject(make_registry(), recipe, out=task.bundle, force=True, cache=cache, report=report)
        man = json.loads((Path(task.bundle) / "manifest.json").read_text())
        result.update(status="done", verdict=res.verdict, summary=res.summary,
                      codes=sorted({f.code for f in res.findings if f.severity != "info"}),
                      array_sha256={k: v["sha256"] for k, v in man["arrays"].items()})
    except UsageError as exc:  # includes ReadError: the subject's input cannot be used
        result.update(status="unusable", error=str(exc), codes=["input.unreadable"])
    except PluginError as exc:
        result.update(status="error", error=str(exc))
    except HeadprepError as exc:
        result.update(status="error", error=str(exc))
    except Exception as exc:  # isolation: a crash is recorded with its traceback, never lost
        result.update(status="error", error=f"{type(exc).__name__}: {exc}", traceback=traceback.format_exc())
    result["steps_computed"] = list(cache.computed)
    result["steps_reused"] = list(cache.reused)
    write_text_atomic(work / "result.json", json.dumps(result, indent=2, default=str))
    return result


@contextlib.contextmanager
def _subject_lock(work: Path, subject: str) -> Iterator[None]:
    with _flock(work / ".lock", f"subject {subject}"):
        yield


@contextlib.contextmanager
def _flock(path: Path, what: str) -> Iterator[None]:
    path.parent.mkdir(parents=True, exist_ok=True)
    fh = open(path, "a+")
    try:
        try:
            fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            fh.seek(0)
            holder = fh.read().strip() or "another process"
            raise UsageError(f"{path.parent}: {what} is being prepared by {holder}; "
                             f"wait for it to finish or use another work folder") from None
        fh.seek(0)
        fh.truncate()
        fh.write(f"headprep pid {os.getpid()}")
        fh.flush()
        yield
    finally:
        fh.close()


def work_lock(work: Path) -> contextlib.AbstractContextManager[None]:
    """Exclusive lock on a cohort's work folder (UsageError if another run holds it)."""
    return _flock(work / ".cohort.lock", "this work folder")


def _clean_partials(root: Path) -> int:
    """Remove temporary files left by a killed run (never files under final names)."""
    n = 0
    if root.is_dir():
        for p in root.rglob(".*.part"):
            with contextlib.suppress(OSError):
                if p.is_dir():
                    import shutil
                    shutil.rmtree(p)
                else:
                    p.unlink()
                n += 1
    return n


# ------------------------------------------------------------------ many subjects
def run_cohort(cohort: Cohort, *, workers: int = 1, scheduler: str | None = None, local_cluster: bool = False,
               report: bool = True, on_done: Callable[[dict[str, Any]], None] | None = None) -> list[dict[str, Any]]:
    """Run every subject: serially, in ``workers`` local processes, or on Dask.

    Parameters
    ----------
    scheduler : str, optional
        Address of a running Dask scheduler (``tcp://host:8786``).
    local_cluster : bool
        Start a Dask ``LocalCluster`` on 127.0.0.1 with ``workers`` processes.

    Returns
    -------
    list of dict
        One result per subject, in cohort order.
    """
    done = on_done or (lambda r: None)
    with work_lock(cohort.work):
        cohort.out.mkdir(parents=True, exist_ok=True)
        _clean_partials(cohort.work)
        _clean_partials(cohort.out)
        tasks = list(cohort.tasks)
        if scheduler or local_cluster:
            results = _run_dask(tasks, workers, scheduler, report, done)
        elif workers > 1:
            results = _run_processes(tasks, workers, report, done)
        else:
            results = []
            for t in tasks:
                results.append(run_subject_task(t, report=report))
                done(results[-1])
    order = {t.subject: i for i, t in enumerate(cohort.tasks)}
    return sorted(results, key=lambda r: order[r["subject"]])


def _lost(task: SubjectTask, error: str) -> dict[str, Any]:
    """The result of a subject whose worker never returned one."""
    return {"subject": task.subject, "bundle": task.bundle, "status": "error", "verdict": None,
            "summary": {}, "codes": [], "error": error}


def _run_processes(tasks: list[SubjectTask], workers: int, report: bool,
                   done: Callable[[dict[str, Any]], None]) -> list[dict[str, Any]]:
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed

    results = []
    # a fork server imports the kit once and forks a clean worker per slot: no per-worker import cost,
    # and no fork of a process that already runs BLAS threads
    mp = multiprocessing.get_context("forkserver")
    mp.set_forkserver_preload(["numpy", "scipy.linalg", "trimesh", "prep.pipeline", "prep.registry"])
    with ProcessPoolExecutor(max_workers=workers, mp_context=mp) as pool:
        futs = {pool.submit(run_subject_task, t, report=report): t for t in tasks}
        for fut in as_completed(futs):
            try:
                r = fut.result()
            except Exception as exc:  # the worker process itself died
                r = _lost(futs[fut], f"worker died: {exc}")
            results.append(r)
            done(r)
    return results


def _run_dask(tasks: list[SubjectTask], workers: int, scheduler: str | None, report: bool,
              done: Callable[[dict[str, Any]], None]) -> list[dict[str, Any]]:
    try:
        from distributed import Client, LocalCluster, as_completed
    except ImportError as exc:
        raise UsageError("Dask is not installed: pip install 'headprep[cluster]'") from exc
    cluster = None
    try:
        if scheduler:
            client = Client(scheduler, timeout="20s")
        else:
            cluster = LocalCluster(n_workers=max(workers, 1), threads_per_worker=1, processes=True,
                                   host="127.0.0.1", dashboard_address=None)
            client = Client(cluster)
    except OSError as exc:
        raise UsageError(f"cannot reach the Dask scheduler {scheduler or '(local)'}: {exc}") from exc
    results = []
    try:
        futs = client.map(run_subject_task, tasks, report=report, pure=False,
                          key=[f"headprep-{t.subject}" for t in tasks])
        by_key = {f.key: t for f, t in zip(futs, tasks)}
        for fut in as_completed(futs):
            try:
                r = fut.result()
            except Exception as exc:
                r = _lost(by_key[fut.key], f"worker failed: {exc}")
            results.append(r)
            done(r)
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
    return results


# ------------------------------------------------------------------ summary tables
COLUMNS = ("subject", "status", "verdict", "fit_rms_mm", "flagged_electrodes", "condition_number",
           "localisation_error_mm", "sensors", "sources", "codes", "error")


def _row(r: Mapping[str, Any]) -> dict[str, Any]:
    s = r.get("summary") or {}
    flagged = s.get("flagged_electrodes")
    return {"subject": r["subject"], "status": r["status"], "verdict": r.get("verdict") or "",
            "fit_rms_mm": s.get("fit_rms_mm", ""), "flagged_electrodes": "" if flagged is None else flagged,
            "condition_number": s.get("condition_number", ""),
            "localisation_error_mm": _round(s.get("localisation_error_median_mm")), "sensors": s.get("sensors", ""),
            "sources": s.get("sources", ""), "codes": " ".join(r.get("codes") or []),
            "error": r.get("error") or ""}


def _round(x: Any, digits: int = 1) -> Any:
    return "" if x is None else round(float(x), digits)


def write_cohort_tables(results: list[dict[str, Any]], out: Path, name: str) -> tuple[Path, Path]:
    """Write ``cohort.csv`` and ``cohort.html`` (atomically) and return their paths."""
    rows = [_row(r) for r in results]
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=COLUMNS)
    w.writeheader()
    w.writerows(rows)
    csv_path, html_path = out / "cohort.csv", out / "cohort.html"
    write_text_atomic(csv_path, buf.getvalue())
    mark = {"pass": "&#10003; pass", "review": "&#9888; review", "fail": "&#10007; fail", "": "&#8212;"}
    body = "".join(
        "<tr>" + "".join(f"<td>{mark.get(str(v), html.escape(str(v))) if k == 'verdict' else html.escape(str(v))}</td>"
                         for k, v in row.items()) + "</tr>" for row in rows)
    counts = {k: sum(r["status"] == k for r in results) for k in ("done", "unusable", "error")}
    page = f"""<!doctype html><html lang="en"><head><meta charset="utf-8"><title>Cohort {html.escape(name)}</title>
<style>body{{font-family:system-ui,sans-serif;margin:2em;color:#1d2a33}}table{{border-collapse:collapse}}
td,th{{border:1px solid #c9d3da;padding:.3em .6em;text-align:left}}th{{background:#eef3f6}}</style></head>
<body><h1>Cohort {html.escape(name)}</h1>
<p>{len(results)} subjects: {counts['done']} prepared, {counts['unusable']} with unusable input,
{counts['error']} with errors.</p>
<table><thead><tr>{''.join(f'<th>{c.replace("_", " ")}</th>' for c in COLUMNS)}</tr></thead>
<tbody>{body}</tbody></table></body></html>
"""
    write_text_atomic(html_path, page)
    return csv_path, html_path
