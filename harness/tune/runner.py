"""Run tune jobs on local processes or a Dask cluster, with a JSON-lines results cache.

The cache holds one line per finished job, ``{"key": ..., ...figures}``, keyed by a hash of the
job's scenario, settings, backend and run length (harness.tune.evaluate.Job.key). A line is appended
and flushed as soon as its chunk finishes, so an interrupted sweep loses at most the chunks that
were running; a torn last line is ignored on reading.
"""
from concurrent.futures import ProcessPoolExecutor, as_completed
import json
import math
import os

from harness.errors import InputError
from harness.tune.evaluate import evaluate

#: Largest number of jobs simulated in one lockstep batch.
MAX_CHUNK = 40
#: Seconds to wait for a Dask scheduler before giving up.
CONNECT_TIMEOUT_S = 10


class Cache:
    """Results by job key, backed by ``path`` (JSON lines, append-only)."""

    def __init__(self, path):
        self.path = path
        self.data = {}
        if os.path.exists(path):
            with open(path, encoding="utf-8") as f:
                for line in f:
                    try:
                        row = json.loads(line)
                    except json.JSONDecodeError:
                        continue        # a line torn by an interrupted write
                    if isinstance(row, dict) and "key" in row:
                        self.data[row["key"]] = row

    def __contains__(self, key):
        return key in self.data

    def get(self, key):
        return self.data.get(key)

    def put_many(self, rows):
        os.makedirs(os.path.dirname(os.path.abspath(self.path)), exist_ok=True)
        with open(self.path, "a+b") as f:
            # A line torn by an interrupted run gets its own end, so the next record starts clean.
            if f.tell() > 0:
                f.seek(-1, os.SEEK_END)
                torn = f.read(1) != b"\n"
            else:
                torn = False
            if torn:
                f.write(b"\n")
            for row in rows:
                f.write((json.dumps(row) + "\n").encode("utf-8"))
            f.flush()
            os.fsync(f.fileno())
        for row in rows:
            self.data[row["key"]] = row


def chunks(jobs, workers):
    """Split jobs into lockstep batches: one scenario and backend each, about ``workers`` in all."""
    groups = {}
    for job in jobs:
        groups.setdefault((job.scenario.source, job.backend), []).append(job)
    total = max(1, len(jobs))
    out = []
    for group in groups.values():
        n = max(1, round(workers * len(group) / total), math.ceil(len(group) / MAX_CHUNK))
        size = math.ceil(len(group) / n)
        out += [group[i:i + size] for i in range(0, len(group), size)]
    return out


class Runner:
    """Evaluates jobs not in the cache, on ``workers`` local processes or a Dask ``scheduler``.

    Parameters
    ----------
    cache : Cache
    duration_s : float
        Simulated time per run, s.
    scheduler : str, optional
        Dask distributed scheduler address (or a ``distributed.Client``); local processes if None.
    workers : int
        Local worker processes.
    progress : bool
        Show a tqdm progress bar (on stderr).
    """

    def __init__(self, cache, duration_s, scheduler=None, workers=2, progress=True):
        self.cache, self.duration_s = cache, duration_s
        self.new = 0
        self.cached = 0
        self._client = None
        self._pool = None
        self.workers = workers
        if scheduler is not None:
            from distributed import Client
            self._own_client = not isinstance(scheduler, Client)
            try:
                self._client = Client(scheduler, timeout=CONNECT_TIMEOUT_S) if self._own_client else scheduler
            except (OSError, TimeoutError) as exc:
                raise InputError(f"--scheduler: cannot reach a Dask scheduler at {scheduler}: "
                                 f"{str(exc).splitlines()[0] if str(exc) else type(exc).__name__}") from None
            self.workers = max(1, sum(self._client.nthreads().values()))
        from tqdm import tqdm
        self.bar = tqdm(total=0, desc="tune", unit="run", disable=None if progress else True,
                        leave=False, mininterval=0.5)

    def close(self):
        self.bar.close()
        if self._pool is not None:
            self._pool.shutdown(cancel_futures=True)
        if self._client is not None and self._own_client:
            self._client.close()

    def _submit_all(self, parts):
        if self._client is not None:
            from distributed import as_completed as dask_completed
            futures = [self._client.submit(evaluate, part, self.duration_s, pure=False) for part in parts]
            for fut in dask_completed(futures):
                yield fut.result()
            return
        if self.workers <= 1 or len(parts) == 1:
            for part in parts:
                yield evaluate(part, self.duration_s)
            return
        if self._pool is None:
            self._pool = ProcessPoolExecutor(max_workers=self.workers)
        futures = [self._pool.submit(evaluate, part, self.duration_s) for part in parts]
        for fut in as_completed(futures):
            yield fut.result()

    def run(self, jobs):
        """Results (dicts) for ``jobs``, from the cache or freshly evaluated, in order."""
        todo, seen = [], set()
        for job in jobs:
            if job.key in self.cache or job.key in seen:
                continue
            seen.add(job.key)
            todo.append(job)
        self.cached += len({j.key for j in jobs} - seen)
        if todo:
            self.bar.total += len(todo)
            self.bar.refresh()
            for rows in self._submit_all(chunks(todo, self.workers)):
                self.cache.put_many(rows)
                self.new += len(rows)
                self.bar.update(len(rows))
        return [self.cache.get(j.key) for j in jobs]
