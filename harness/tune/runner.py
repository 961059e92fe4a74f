"""Run tune jobs on local processes or a Dask cluster, with a JSON-lines results cache.

The cache holds one line per finished job, ``{"key": ..., ...figures}``, keyed by a hash of the
job's scenario (its run length included), settings and backend (harness.tune.evaluate.Job.key). A
line is appended and flushed as soon as its chunk finishes, so an interrupted sweep loses at most
the chunks that were running. A line cut short by an interrupted write is dropped on reading (the
file is rewritten without it, so the next record starts on a line of its own) and counted in
``Cache.dropped``.
"""
import json
import math
import multiprocessing
import os
import signal

from harness.atomic import atomic_write
from harness.errors import InputError
from harness.tune.evaluate import evaluate

#: Largest number of jobs simulated in one lockstep batch.
MAX_CHUNK = 40
#: Seconds to wait for a Dask scheduler before giving up.
CONNECT_TIMEOUT_S = 10


class Cache:
    """Results by job key, backed by ``path`` (JSON lines, append-only).

    ``dropped`` counts the lines of the file that were not whole records (cut short by an
    interrupted write); they are removed from the file on reading.
    """

    def __init__(self, path):
        self.path = path
        self.data = {}
        self.dropped = 0
        if not os.path.exists(path):
            return
        good = []
        with open(path, "rb") as f:
            for line in f:
                try:
                    row = json.loads(line)
                except (json.JSONDecodeError, UnicodeDecodeError):
                    row = None
                if isinstance(row, dict) and "key" in row:
                    self.data[row["key"]] = row
                    good.append(line if line.endswith(b"\n") else line + b"\n")
                elif line.strip():
                    self.dropped += 1
        if self.dropped:
            try:
                with atomic_write(path, "wb") as f:
                    f.writelines(good)
            except OSError:
                pass        # left in place: skipped again on reading, ended before appending

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


def _ignore_sigint():
    """In a worker: leave Ctrl-C to the parent, which reports it in one line and stops the pool;
    SIGTERM (the parent's pool.terminate, or a kill of the group) ends the worker quietly, not
    through the one-line handler the forked worker inherits from harness.cli.main."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)


def chunks(jobs, workers, max_chunk=MAX_CHUNK):
    """Split jobs into lockstep batches: one scenario and backend each, about ``workers`` in all,
    none over ``max_chunk``."""
    groups = {}
    for job in jobs:
        groups.setdefault((job.scenario.source, job.backend), []).append(job)
    total = max(1, len(jobs))
    out = []
    for group in groups.values():
        n = max(1, round(workers * len(group) / total), math.ceil(len(group) / max_chunk))
        size = math.ceil(len(group) / n)
        out += [group[i:i + size] for i in range(0, len(group), size)]
    return out


class Runner:
    """Evaluates jobs not in the cache, on ``workers`` local processes or a Dask ``scheduler``.

    Parameters
    ----------
    cache : Cache
    scheduler : str, optional
        Dask distributed scheduler address (or a ``distributed.Client``); local processes if None.
    workers : int
        Local worker processes.
    progress : bool
        Show a tqdm progress bar (on stderr).
    evaluate : callable
        Rows (dicts with the job's ``key``) of a list of jobs run as one batch; jobs have ``key``,
        ``scenario`` and ``backend``. Default: tune's (harness.tune.evaluate.evaluate).
    desc, max_chunk :
        The progress bar's label, and the most jobs in one batch.
    """

    def __init__(self, cache, scheduler=None, workers=2, progress=True, evaluate=evaluate, desc="tune",
                 max_chunk=MAX_CHUNK):
        self.cache = cache
        self.evaluate, self.max_chunk = evaluate, max_chunk
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
        self.bar = tqdm(total=0, desc=desc, unit="run", disable=None if progress else True,
                        leave=False, mininterval=0.5)

    def close(self):
        self.bar.close()
        if self._pool is not None:
            # Every result has been read unless the run is being abandoned (Ctrl-C, an error):
            # either way nothing the workers still do is wanted.
            self._pool.terminate()
            self._pool.join()
        if self._client is not None and self._own_client:
            self._client.close()

    def _submit_all(self, parts):
        if self._client is not None:
            from distributed import as_completed as dask_completed
            futures = [self._client.submit(self.evaluate, part, pure=False) for part in parts]
            for fut in dask_completed(futures):
                yield fut.result()
            return
        if self.workers <= 1 or len(parts) == 1:
            for part in parts:
                yield self.evaluate(part)
            return
        if self._pool is None:
            self._pool = multiprocessing.Pool(self.workers, initializer=_ignore_sigint)
        yield from self._pool.imap_unordered(self.evaluate, parts)

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
            for rows in self._submit_all(chunks(todo, self.workers, self.max_chunk)):
                self.cache.put_many(rows)
                self.new += len(rows)
                self.bar.update(len(rows))
        return [self.cache.get(j.key) for j in jobs]
