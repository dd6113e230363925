"""Mine many repositories into one store in parallel.

Design (measured in ``bench/``, see ``bench/README.md``): every worker runs the
ordinary :func:`~procmetrics.mine.mine_repository` for one repository and
writes its own batches, so each repository keeps its own provenance
(``repository`` and ``mining_run`` rows, incremental tips) exactly as when it is
mined alone. Parsing runs in parallel; writes are serialised by the store's
write lock (SQLite: the database file lock, waited for up to the busy
timeout; PostgreSQL: a row lock, with the batch inserts themselves concurrent
up to that point). Shipping rows to one writer would add a copy of every row
through a pipe or the network and would make that single writer the ceiling,
for no gain on SQLite and a loss on PostgreSQL.

Executors: in-process for one repository or ``jobs=1``; a local process pool
(``jobs=N``); or a Dask ``distributed`` cluster (``scheduler="tcp://host:8786"``),
whose workers must see the repository paths and the store under the same names.
A SQLite file is refused for a scheduler that is not on this machine (file
locks over network file systems are unreliable): use a PostgreSQL URL there.
"""
from __future__ import annotations

import multiprocessing
import os
import time
import uuid
from collections import Counter
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import asdict, dataclass, replace
from pathlib import Path, PurePath
from typing import Iterable, Sequence
from urllib.parse import urlsplit

from procmetrics.errors import ConfigError, ProcmetricsError, StoreBusy
from procmetrics.mine.miner import mine_repository
from procmetrics.mine.options import MineOptions, MiningSummary
from procmetrics.store import open_store, resolve_url

_LOCAL_HOSTS = {"127.0.0.1", "localhost", "::1", ""}


@dataclass(frozen=True)
class RepoFailure:
    """A repository that could not be mined (the others carry on)."""

    repo: str
    path: str
    error: str          # exception class name, e.g. "NotARepository"
    message: str
    exit_code: int

    def to_dict(self) -> dict[str, object]:
        return asdict(self)


@dataclass(frozen=True)
class MultiMiningResult:
    """Outcome of :func:`mine_many`: one summary or failure per repository, input order."""

    summaries: tuple[MiningSummary, ...]
    failures: tuple[RepoFailure, ...]
    executor: str       # "in-process" | "process-pool" | "dask"
    workers: int
    seconds: float

    @property
    def ok(self) -> bool:
        return not self.failures

    def to_dict(self) -> dict[str, object]:
        return {"summaries": [s.to_dict() for s in self.summaries],
                "failures": [f.to_dict() for f in self.failures],
                "executor": self.executor, "workers": self.workers, "seconds": self.seconds}


def read_repo_list(path: str | os.PathLike[str]) -> list[str]:
    """Repository paths from a text file: one a line; blank lines and ``#`` comments skipped.

    Relative paths are relative to the list file's folder.
    """
    file = Path(path)
    try:
        text = file.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"cannot read repository list: {exc}", path=str(file)) from exc
    out = []
    for line in text.splitlines():
        entry = line.strip()
        if not entry or entry.startswith("#"):
            continue
        p = Path(entry).expanduser()
        out.append(str(p if p.is_absolute() else file.parent / p))
    if not out:
        raise ConfigError("the repository list names no repository", path=str(file))
    return out


def _base_name(path: str) -> str:
    p = PurePath(path)
    if p.name == ".git":
        p = p.parent
    name = p.name
    return name[:-4] if name.endswith(".git") and len(name) > 4 else name


def assign_names(paths: Sequence[str]) -> list[str]:
    """A distinct store name per path: the folder name, qualified by its parent when
    two share a folder name (``a/fw``, ``b/fw`` -> ``a-fw``, ``b-fw``), then numbered."""
    base = [_base_name(p) or "repo" for p in paths]
    counts = Counter(base)
    names = []
    for p, b in zip(paths, base):
        if counts[b] > 1:
            parent = PurePath(p)
            if parent.name == ".git":
                parent = parent.parent
            qual = parent.parent.name
            b = f"{qual}-{b}" if qual else b
        names.append(b)
    seen: Counter[str] = Counter()
    final = []
    totals = Counter(names)
    for n in names:
        seen[n] += 1
        final.append(n if totals[n] == 1 else f"{n}-{seen[n]}")
    if len(set(final)) != len(final):       # e.g. a real "x-2" next to a numbered "x"
        final = [f"{n}-{i}" for i, n in enumerate(final, start=1)]
    return final


#: attempts per repository when PostgreSQL picks this worker as a deadlock victim
DEADLOCK_ATTEMPTS = 3


def _mine_one(path: str, name: str, store_url: str,
              options: MineOptions) -> MiningSummary | RepoFailure:
    """Worker body: mine one repository; library errors become a :class:`RepoFailure`.

    Workers writing to one PostgreSQL store at once can deadlock (a CI run saw
    "deadlock detected" once in a few hundred runs of the two-worker test); the server
    then rolls back one transaction. That worker mines its repository again, up to
    :data:`DEADLOCK_ATTEMPTS` times: the next run removes the rows of the interrupted
    one (as after Ctrl-C), so the store ends as after a clean run.
    """
    for attempt in range(1, DEADLOCK_ATTEMPTS + 1):
        try:
            return mine_repository(path, store=store_url,
                                   options=replace(options, repo_name=name, progress=False))
        except StoreBusy as exc:
            if "deadlock detected" not in str(exc) or attempt == DEADLOCK_ATTEMPTS:
                return RepoFailure(name, path, exc.__class__.__name__, str(exc),
                                   exc.exit_code)
            time.sleep(0.2 * attempt)
        except ProcmetricsError as exc:
            return RepoFailure(name, path, exc.__class__.__name__, str(exc), exc.exit_code)
    raise AssertionError("unreachable")  # pragma: no cover - the loop always returns


def _is_local(address: str) -> bool:
    if address.startswith("inproc://"):
        return True
    host = urlsplit(address if "://" in address else f"tcp://{address}").hostname or ""
    return host in _LOCAL_HOSTS


def mine_many(paths: Iterable[str | os.PathLike[str]], *,
              store: str | os.PathLike[str] | None = None,
              options: MineOptions | None = None, jobs: int | None = None,
              scheduler: str | None = None) -> MultiMiningResult:
    """Mine several repositories into one store, in parallel.

    Parameters
    ----------
    paths
        Repository folders (as the workers see them). A path given twice is mined once.
    store
        SQLite file or SQLAlchemy URL shared by all workers.
    options
        Options for every repository (``repo_name`` must be unset when there is more
        than one; names come from :func:`assign_names`).
    jobs
        Local worker processes (default: one per CPU, at most one per repository).
    scheduler
        Address of a Dask ``distributed`` scheduler; the work goes to its workers.

    A repository that fails with a library error is reported in ``failures``
    and does not stop the others; any other exception propagates.
    """
    opts = options or MineOptions()
    raw = [os.fspath(p) for p in paths]
    if not raw:
        raise ConfigError("no repository to mine")
    local_paths = scheduler is None or _is_local(scheduler)
    unique: list[str] = []
    for p in raw:
        q = str(Path(p).expanduser().resolve()) if local_paths else p
        if q not in unique:
            unique.append(q)
    if opts.repo_name is not None and len(unique) > 1:
        raise ConfigError("--repo-name names one repository; several were given "
                          "(names default to the folder names)")
    names = [opts.repo_name] if opts.repo_name is not None else assign_names(unique)
    if jobs is not None and jobs < 1:
        raise ConfigError(f"--jobs must be at least 1, got {jobs}")
    if jobs is not None and scheduler is not None:
        raise ConfigError("--jobs and --scheduler exclude each other "
                          "(the Dask cluster decides how many workers run)")
    url = resolve_url(store)
    if scheduler is not None and url.startswith("sqlite") and not _is_local(scheduler):
        raise ConfigError("a SQLite store cannot be shared by machines of a Dask cluster; "
                          "use a PostgreSQL URL (postgresql+psycopg://...)")
    from procmetrics.mine.guards import refuse_store_inside
    refuse_store_inside(store, unique)
    open_store(url).dispose()       # create the schema once, before workers race for it
    started = time.monotonic()
    work = list(zip(unique, names))
    if scheduler is not None:
        results, executor, workers = _run_dask(work, url, opts, scheduler)
    else:
        workers = min(jobs or os.cpu_count() or 1, len(work))
        if workers == 1:
            results = [_mine_one(p, n, url, opts) for p, n in work]
            executor = "in-process"
        else:
            results = _run_pool(work, url, opts, workers)
            executor = "process-pool"
    return MultiMiningResult(
        summaries=tuple(r for r in results if isinstance(r, MiningSummary)),
        failures=tuple(r for r in results if isinstance(r, RepoFailure)),
        executor=executor, workers=workers,
        seconds=round(time.monotonic() - started, 3))


def _run_pool(work: list[tuple[str, str]], url: str, opts: MineOptions,
              workers: int) -> list[MiningSummary | RepoFailure]:
    results: list[MiningSummary | RepoFailure | None] = [None] * len(work)
    # spawn: no engine or git pipe of this process leaks into a worker
    ctx = multiprocessing.get_context("spawn")
    with ProcessPoolExecutor(max_workers=workers, mp_context=ctx) as pool:
        futures = {pool.submit(_mine_one, p, n, url, opts): i for i, (p, n) in enumerate(work)}
        try:
            for fut in as_completed(futures):
                results[futures[fut]] = fut.result()
        except BaseException:
            pool.shutdown(wait=True, cancel_futures=True)
            raise
    return [r for r in results if r is not None]


def _run_dask(work: list[tuple[str, str]], url: str, opts: MineOptions,
              scheduler: str) -> tuple[list[MiningSummary | RepoFailure], str, int]:
    try:
        from distributed import Client
    except ImportError as exc:  # pragma: no cover - a declared dependency
        raise ConfigError(f"--scheduler needs Dask distributed: {exc}") from exc
    tag = uuid.uuid4().hex[:8]
    try:
        client = Client(scheduler, set_as_default=False, timeout="30s")
    except OSError as exc:
        raise ConfigError(f"cannot reach the Dask scheduler at {scheduler}: {exc}") from exc
    with client:
        workers = len(client.scheduler_info().get("workers", {}))
        futures = [client.submit(_mine_one, p, n, url, opts, pure=False,
                                 key=f"procmetrics-mine-{tag}-{i}")
                   for i, (p, n) in enumerate(work)]
        try:
            results = client.gather(futures)
        except BaseException:
            client.cancel(futures)
            raise
    return list(results), "dask", workers
