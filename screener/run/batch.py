"""Screen many structures: `run_batch` ranks every input with the same settings into one result store.

Inputs are files, folders (searched recursively for the structure formats the tool reads) or text files that
list paths (one per line, '#' comments, relative to the list's folder). A structure already in the store with
the same content and settings is skipped, so a finished batch re-run does nothing and a killed one, started
again, finishes the rest. Work runs in N local processes (BLAS limited to one thread each) or, with a Dask
scheduler address, on a cluster; results always stream back to the one store on this machine.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import os
import time
from dataclasses import dataclass
from pathlib import Path

from screener.errors import ParameterError, ScreenerError

#: Endings of text files that list structure paths, one per line.
LIST_ENDINGS = (".txt", ".list")


@dataclass(frozen=True)
class BatchSummary:
    """What a batch did."""

    store: Path
    """The result store."""
    ranked: int
    """Structures ranked in this run."""
    failed: int
    """Structures that ended in an error in this run (stored with their message)."""
    skipped: int
    """Structures already in the store with the same content and settings (or repeated inputs)."""
    interrupted: bool
    """True when the batch was stopped (Ctrl-C) before every structure was done."""
    seconds: float
    """Wall time of the run, s."""


def structure_endings() -> tuple[str, ...]:
    """File endings of the structure formats the tool reads."""
    from screener.structure.formats import FORMATS

    return tuple(e for _, endings in FORMATS.values() for e in endings if e.startswith("."))


def collect_inputs(inputs) -> list[Path]:
    """Structure files named by ``inputs`` (files, folders searched recursively, or path lists), in order."""
    endings = structure_endings()
    out: list[Path] = []
    for item in inputs:
        p = Path(item)
        if p.is_dir():
            out += sorted(f for f in p.rglob("*") if f.is_file() and f.name.lower().endswith(endings))
        elif p.is_file() and p.name.lower().endswith(LIST_ENDINGS):
            for n, line in enumerate(p.read_text(encoding="utf-8", errors="replace").splitlines(), start=1):
                line = line.split("#", 1)[0].strip()
                if line:
                    q = Path(line)
                    out.append(q if q.is_absolute() else p.parent / q)
        elif p.exists():
            out.append(p)
        else:
            raise ParameterError(f"input {p} does not exist; give structure files, folders or a .txt list of paths")
    return out


def content_hash(path: Path) -> str:
    """SHA-256 of the file's bytes (or of the error reading it)."""
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except OSError as exc:
        return hashlib.sha256(f"unreadable: {exc}".encode()).hexdigest()


def rank_options(params=None, generators=None, extra_q=(), settings=None, relax_cell=False) -> dict:
    """The settings every structure of a batch is ranked with, as a plain (JSON-ready, picklable) mapping."""
    from screener.screen.settings import ScreenSettings

    settings = settings or ScreenSettings()
    params_text = None
    if params is not None:
        try:
            params_text = Path(params).read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as exc:
            raise ParameterError(f"cannot read parameter file {params}: {exc}") from None
    return {
        "params": None if params is None else str(params),
        "params_sha256": None if params_text is None else hashlib.sha256(params_text.encode()).hexdigest(),
        "generators": list(generators) if generators else None,
        "extra_q": [list(map(float, q)) for q in extra_q],
        "relax_cell": bool(relax_cell),
        "settings": dataclasses.asdict(settings),
    }


def settings_hash(options: dict) -> str:
    """Hash of the options and the tool version: a structure is re-ranked only when these change."""
    from screener import __version__

    blob = json.dumps({"options": {k: v for k, v in options.items() if k != "params"}, "version": __version__},
                      sort_keys=True)
    return hashlib.sha256(blob.encode()).hexdigest()


def rank_one(path: str, digest: str, options: dict) -> dict:
    """Rank one structure file; never raises for a bad input (the outcome carries the one-line message)."""
    from screener.screen.rank import rank
    from screener.screen.settings import ScreenSettings
    from screener.structure.formats import read_structure
    from screener.tb.model import single_blas_thread

    t0 = time.perf_counter()
    outcome = {"path": str(path), "content_hash": digest}
    try:
        crystal = read_structure(path)
        params = None
        if options["params"]:
            from screener.tb.param_file import load_parameters

            params = load_parameters(options["params"], sorted(set(crystal.species)))
        with single_blas_thread():
            result = rank(crystal, params, generators=options["generators"], extra_q=options["extra_q"],
                          settings=ScreenSettings(**options["settings"]), progress=False,
                          relax_cell=options["relax_cell"])
        outcome.update(status="ranked", result=_json_safe(result.to_dict()))
    except ScreenerError as exc:
        outcome.update(status="error", error=str(exc).splitlines()[0] if str(exc) else type(exc).__name__)
    except Exception as exc:  # a failing structure must not stop the batch; the message says it is ours
        outcome.update(status="error", error=f"internal error ({type(exc).__name__}): {exc}".splitlines()[0])
    outcome["seconds"] = time.perf_counter() - t0
    return outcome


def _json_safe(obj):
    """NaN and infinities become None, so the stored JSON is valid JSON."""
    if isinstance(obj, float):
        return obj if obj == obj and abs(obj) != float("inf") else None
    if isinstance(obj, dict):
        return {k: _json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_json_safe(v) for v in obj]
    return obj


def _init_worker() -> None:
    import signal

    from threadpoolctl import threadpool_limits

    # Ctrl-C is handled by the submitting process, which lets the structures in flight finish
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    threadpool_limits(limits=1, user_api="blas")


def run_batch(inputs, *, store="results.sqlite", workers: int | None = None, dask: str | None = None,
              progress: bool = True, **options) -> BatchSummary:
    """Rank every structure of ``inputs`` into the SQLite ``store``; see the module docstring.

    ``options`` are those of `rank_options` (params, generators, extra_q, settings, relax_cell). ``workers``:
    local processes (default: the number of cores; 1 runs in this process). ``dask``: address of a running Dask
    scheduler to send the work to instead (needs ``pip install 'screener[cluster]'``).
    """
    from tqdm.auto import tqdm

    from screener import __version__
    from screener.run.store import Store

    t_start = time.perf_counter()
    paths = collect_inputs(inputs)
    opts = rank_options(**options)
    key = settings_hash(opts)
    workers = int(workers or os.cpu_count() or 1)
    if workers < 1:
        raise ParameterError(f"--workers must be at least 1, got {workers}")
    counts = {"ranked": 0, "failed": 0, "skipped": 0}
    interrupted = False
    with Store(store) as db:
        done = db.done(key)
        todo, seen = [], set()
        for p in paths:
            digest = content_hash(p)
            if digest in done or digest in seen:
                counts["skipped"] += 1
                continue
            seen.add(digest)
            todo.append((str(p), digest))
        run_id = db.start_run(__version__, opts, key)
        bar = tqdm(total=len(todo), desc="batch", unit=" structures", disable=not progress, leave=False)

        def record(outcome):
            if db.add(run_id, outcome, key):
                counts["ranked" if outcome["status"] == "ranked" else "failed"] += 1
            else:
                counts["skipped"] += 1
            bar.update(1)
            bar.set_postfix(done=counts["ranked"], failed=counts["failed"], skipped=counts["skipped"])

        try:
            if dask:
                interrupted = _run_dask(dask, todo, opts, record)
            elif workers == 1 or len(todo) <= 1:
                for path, digest in todo:
                    record(rank_one(path, digest, opts))
            else:
                interrupted = _run_local(workers, todo, opts, record)
        except KeyboardInterrupt:
            interrupted = True
        finally:
            bar.close()
    return BatchSummary(Path(store), counts["ranked"], counts["failed"], counts["skipped"], interrupted,
                        time.perf_counter() - t_start)


def _run_local(workers: int, todo, opts, record) -> bool:
    from concurrent.futures import ProcessPoolExecutor, as_completed

    with ProcessPoolExecutor(max_workers=workers, initializer=_init_worker) as pool:
        futures = [pool.submit(rank_one, path, digest, opts) for path, digest in todo]
        try:
            for f in as_completed(futures):
                record(f.result())
        except KeyboardInterrupt:
            # stop cleanly: nothing new starts, the structures in flight finish and are stored
            for f in futures:
                f.cancel()
            for f in futures:
                if not f.cancelled():
                    try:
                        record(f.result())
                    except Exception:  # noqa: BLE001  (a worker lost while stopping: the rerun redoes it)
                        pass
            return True
    return False


def _run_dask(address: str, todo, opts, record) -> bool:
    try:
        from dask.distributed import Client, as_completed
    except ImportError:
        raise ParameterError(
            "--dask needs the cluster extra: pip install 'screener[cluster]' (Dask distributed)"
        ) from None
    with Client(address) as client:
        futures = [client.submit(rank_one, path, digest, opts, pure=False) for path, digest in todo]
        try:
            for f in as_completed(futures):
                record(f.result())
        except KeyboardInterrupt:
            client.cancel([f for f in futures if not f.done()])
            return True
    return False


def batch(paths, *, store="results.sqlite", workers: int | None = None, dask: str | None = None,
          progress: bool = False, **options):
    """Rank every structure of ``paths`` into ``store`` and return the store's table (pandas.DataFrame)."""
    from screener.run.store import load_store

    run_batch(paths, store=store, workers=workers, dask=dask, progress=progress, **options)
    return load_store(store)
