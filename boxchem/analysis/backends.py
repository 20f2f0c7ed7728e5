"""Where batches run: in this process, in local worker processes, or on a dask.distributed cluster.

A back-end only decides where :func:`boxchem.analysis.batches.run_batch`
runs; the batches themselves (which members, in which order) are made by
the engine from the member table alone, so every back-end gives the same
numbers.  Each back-end is an iterator over ``(task, outcome)`` where the
outcome is a :class:`BatchOutput` or a :class:`BatchFault` (the worker died,
or the batch overran its time limit); the engine decides about retries.

Local workers (``LocalWorkers``) are plain ``python -m
boxchem.analysis.worker`` processes talking over a pipe:

* they die with their parent on any signal: on Linux the kernel kills them
  when the parent dies (``PR_SET_PDEATHSIG``), elsewhere a watchdog thread
  notices the parent is gone within a second; they ignore SIGINT (a Ctrl-C
  reaches the whole process group; the parent then stops them);
* a worker that dies (killed, out of memory, a crash in compiled code) is
  noticed when its pipe closes; its batch comes back as a fault and a new
  worker takes its place;
* a batch that runs longer than ``member_time_limit_s`` times its number of
  members is stopped by killing its worker (a stuck compiled loop cannot be
  interrupted any other way).

dask.distributed (``DaskBackend``): a future per batch, at most two per
worker core in flight (bounded memory in this process); worker loss and
rescheduling are the cluster's job; a batch that still fails (``KilledWorker``)
comes back as a fault.  Time limits are checked inside the batch.
"""
from __future__ import annotations

import collections
import os
import pickle
import subprocess
import sys
import time as _time
from dataclasses import dataclass
from multiprocessing.connection import Connection, wait
from pathlib import Path
from typing import Iterable, Iterator

from ..errors import BoxchemError
from .batches import BatchOutput, BatchTask, run_batch

__all__ = ["BatchFault", "in_process", "LocalWorkers", "DaskBackend"]

#: how long a stopped worker gets to exit after SIGTERM before SIGKILL [s]
STOP_GRACE_S = 0.5
#: poll interval of the parent loop [s] (time limits, interrupt latency)
POLL_S = 0.2


@dataclass
class BatchFault:
    """A batch that produced no result: its worker died, or it overran its time limit."""

    message: str
    timed_out: bool = False


def _outcome(out: BatchOutput) -> BatchOutput | BatchFault:
    """A batch that did not run as a whole becomes a fault (the engine re-runs its members)."""
    if out.fault:
        return BatchFault(out.message[0], timed_out=out.fault == "timeout")
    return out


def in_process(tasks: Iterable[BatchTask]) -> Iterator[tuple[BatchTask, BatchOutput | BatchFault]]:
    """Run batches one after another in this process (time limits checked inside the batch)."""
    for task in tasks:
        yield task, _outcome(run_batch(task))


class _Worker:
    def __init__(self, env):
        parent_read, child_write = os.pipe()
        child_read, parent_write = os.pipe()
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "boxchem.analysis.worker", str(child_read), str(child_write),
             str(os.getpid())],
            pass_fds=(child_read, child_write), env=env, stdin=subprocess.DEVNULL)
        os.close(child_read)
        os.close(child_write)
        self.recv_conn = Connection(parent_read, writable=False)
        self.send_conn = Connection(parent_write, readable=False)
        self.task: BatchTask | None = None
        self.started = 0.0

    def submit(self, task: BatchTask) -> None:
        self.task, self.started = task, _time.perf_counter()
        self.send_conn.send_bytes(pickle.dumps(task, protocol=pickle.HIGHEST_PROTOCOL))

    def stop(self) -> None:
        for conn in (self.send_conn, self.recv_conn):
            try:
                conn.close()
            except OSError:
                pass
        if self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(STOP_GRACE_S)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()

    def death_note(self) -> str:
        code = self.proc.poll()
        if code is None:
            try:
                code = self.proc.wait(1.0)
            except subprocess.TimeoutExpired:
                return "worker process stopped answering"
        if code < 0:
            import signal
            try:
                name = signal.Signals(-code).name
            except ValueError:
                name = f"signal {-code}"
            return f"worker process died ({name})"
        return f"worker process exited with status {code}"


def _worker_env() -> dict:
    """The environment of a worker: ours, with this boxchem importable first."""
    env = dict(os.environ)
    root = str(Path(__file__).resolve().parents[2])
    env["PYTHONPATH"] = root + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    return env


class LocalWorkers:
    """``n`` worker processes on this machine (see the module docstring)."""

    def __init__(self, n: int):
        if n < 1:
            raise BoxchemError(f"--workers: expected at least 1, got {n}")
        self.n = int(n)
        self.workers: list[_Worker] = []
        self._env = _worker_env()
        # start them now: their imports overlap with the parent's own setup
        self._fresh = [self._spawn(self._env) for _ in range(self.n)]

    def run(self, tasks: Iterable[BatchTask]) -> Iterator[tuple[BatchTask, BatchOutput | BatchFault]]:
        queue = collections.deque()
        source = iter(tasks)
        env = self._env
        idle: list[_Worker] = list(self._fresh)
        self._fresh = []
        busy: dict[int, _Worker] = {}
        try:
            while True:
                while len(queue) < self.n:     # pull lazily: tasks may be added while running
                    try:
                        queue.append(next(source))
                    except StopIteration:
                        break
                while queue and (idle or len(self.workers) < self.n):
                    worker = idle.pop() if idle else self._spawn(env)
                    task = queue.popleft()
                    try:
                        worker.submit(task)
                    except OSError:
                        # it died before it read the batch (broken pipe): the same fault as
                        # dying while running it
                        note = worker.death_note()
                        self._discard(worker)
                        yield task, BatchFault(f"{note} before it received this member's batch")
                        continue
                    busy[worker.recv_conn.fileno()] = worker
                if not busy:
                    if not queue:
                        return
                    continue
                ready = wait([w.recv_conn for w in busy.values()], timeout=POLL_S)
                for conn in ready:
                    worker = busy.pop(conn.fileno())
                    task = worker.task
                    try:
                        out = pickle.loads(conn.recv_bytes())
                    except (EOFError, OSError, pickle.UnpicklingError):
                        note = worker.death_note()
                        self._discard(worker)
                        yield task, BatchFault(f"{note} while running this member's batch")
                        continue
                    worker.task = None
                    idle.append(worker)
                    yield task, _outcome(out)
                now = _time.perf_counter()
                for fd, worker in list(busy.items()):
                    limit = worker.task.time_limit_s
                    if limit and now - worker.started > limit * len(worker.task.rows) + 1.0:
                        busy.pop(fd)
                        task = worker.task
                        self._discard(worker)
                        what = f"member {int(task.rows[0])}" if len(task.rows) == 1 \
                            else f"batch of {len(task.rows)} members"
                        yield task, BatchFault(f"{what} exceeded the time limit of "
                                               f"{limit * len(task.rows):g} s (wall clock); its "
                                               f"worker was stopped", timed_out=True)
        finally:
            self.close()

    def _spawn(self, env) -> _Worker:
        worker = _Worker(env)
        self.workers.append(worker)
        return worker

    def _discard(self, worker: _Worker) -> None:
        worker.stop()
        if worker in self.workers:
            self.workers.remove(worker)

    def close(self) -> None:
        """Stop every worker (SIGTERM, then SIGKILL after STOP_GRACE_S)."""
        workers, self.workers = self.workers, []
        for worker in workers:
            if worker.proc.poll() is None:
                worker.proc.terminate()
        deadline = _time.perf_counter() + STOP_GRACE_S
        for worker in workers:
            try:
                worker.proc.wait(max(deadline - _time.perf_counter(), 0.01))
            except subprocess.TimeoutExpired:
                worker.proc.kill()
                worker.proc.wait()
            for conn in (worker.send_conn, worker.recv_conn):
                try:
                    conn.close()
                except OSError:
                    pass


class DaskBackend:
    """Batches as futures on a dask.distributed cluster (``scheduler`` address or a ``client``)."""

    def __init__(self, *, scheduler: str | None = None, client=None):
        try:
            import distributed
        except ImportError:
            raise BoxchemError("--scheduler: dask.distributed is not installed; "
                               "pip install 'dask[distributed]'") from None
        self._own = client is None
        if client is None:
            try:
                client = distributed.Client(scheduler, timeout="10s")
            except (OSError, TimeoutError) as exc:
                raise BoxchemError(f"--scheduler {scheduler}: cannot connect to the dask scheduler "
                                   f"({exc}); expected an address like tcp://HOST:8786 of a "
                                   f"running `dask scheduler`") from None
        self.client = client

    def _slots(self) -> int:
        try:
            cores = sum(self.client.nthreads().values())
        except Exception:
            cores = 1
        return max(2 * cores, 2)

    def run(self, tasks: Iterable[BatchTask]) -> Iterator[tuple[BatchTask, BatchOutput | BatchFault]]:
        from distributed import as_completed
        source = iter(tasks)
        running: dict = {}     # future key -> (future, task)
        stream = as_completed()
        try:
            def submit_next() -> bool:
                try:
                    task = next(source)
                except StopIteration:
                    return False
                future = self.client.submit(
                    run_batch, task, pure=False,
                    key=f"boxchem-batch-{os.getpid()}-{id(self)}-{task.batch_id}-{task.attempt}")
                running[future.key] = (future, task)
                stream.add(future)
                return True

            for _ in range(self._slots()):
                if not submit_next():
                    break
            for future in stream:
                _, task = running.pop(future.key)
                try:
                    out = future.result()
                except Exception as exc:        # KilledWorker, a lost connection, ...
                    outcome = BatchFault(f"dask: {type(exc).__name__}: {exc}")
                else:
                    outcome = _outcome(out)
                future.release()
                yield task, outcome
                submit_next()
        finally:
            if running:
                try:
                    self.client.cancel([f for f, _ in running.values()])
                except Exception:
                    pass
            if self._own:
                try:
                    self.client.close(timeout=2)
                except Exception:
                    pass
