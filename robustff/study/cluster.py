"""The study's chunks on a Dask cluster, surviving the loss of workers.

Each chunk is one Dask future (``Client.submit``). Dask itself keeps the run going when a worker
is lost: the scheduler hands the chunks that worker was running, or whose finished results it
held, to the remaining workers (up to ``distributed.scheduler.allowed-failures`` losses per
chunk), and a chunk that raises is retried ``TASK_RETRIES`` times. Results are read in chunk
order, so they are the same as a local run's whatever worker computed them.

Only a cluster that cannot go on ends the run early: no worker for ``NO_WORKER_GRACE`` seconds,
the scheduler unreachable, or a chunk that Dask gave up on. Then the chunks finished so far are
kept and the study is marked partial, as after Ctrl-C, with one warning line saying why (through
:mod:`logging`, which prints it on stderr unless the application configures logging).
"""

from __future__ import annotations

import contextlib
import functools
import logging
import time
import uuid
from collections.abc import Iterator, Sequence

from robustff.errors import RobustffError

__all__ = ["cluster_results", "NO_WORKER_GRACE", "TASK_RETRIES", "CONNECT_TIMEOUT"]

#: Seconds to wait for the scheduler to answer when connecting.
CONNECT_TIMEOUT = 30.0
#: Seconds a cluster may have no worker (at the start, or after losing all of them) before the
#: run stops; a worker that joins within this time picks the chunks up.
NO_WORKER_GRACE = 30.0
#: Times Dask runs a chunk again when it raises (worker losses are counted separately by Dask).
TASK_RETRIES = 2
#: Seconds between checks of the cluster while a chunk is awaited.
_POLL = 0.5

_log = logging.getLogger(__name__)


def cluster_results(
    tasks: Sequence[tuple], address: str, *, grace: float | None = None
) -> Iterator:
    """Run ``(function, args, kwargs)`` tasks on the cluster at ``address``; results in order.

    Parameters
    ----------
    tasks : sequence of (callable, tuple, dict)
        The function and its arguments.
    address : str
        The scheduler, ``tcp://HOST:PORT``.
    grace : float, optional
        Seconds without any worker before giving up (default ``NO_WORKER_GRACE``).

    Yields
    ------
    object
        Each task's return value, in task order. The generator ends early (fewer results than
        tasks) when the cluster cannot go on; closing it cancels the chunks not yet read.

    Raises
    ------
    RobustffError
        When the scheduler cannot be reached, or no worker joins within ``grace`` seconds
        (nothing has run yet, so there is nothing to keep).
    Exception
        An error raised by a task itself (after Dask's retries), as a local run raises it.
    """
    from distributed import Client  # the "cluster" extra

    grace = NO_WORKER_GRACE if grace is None else float(grace)
    with _one_line_logs():
        yield from _results(Client, tasks, address, grace)


def _results(client_type, tasks: Sequence[tuple], address: str, grace: float) -> Iterator:
    try:
        client = client_type(address, timeout=CONNECT_TIMEOUT)
    except (OSError, ValueError) as exc:
        raise RobustffError(
            f"--cluster {address}: cannot connect to the scheduler ({exc})"
        ) from None
    futures: list = []
    try:
        try:
            client.wait_for_workers(1, timeout=grace)
        except TimeoutError:
            raise RobustffError(
                f"--cluster {address}: no worker joined the scheduler within {grace:g} s "
                "(start workers with: dask worker " + address + ")"
            ) from None
        run = uuid.uuid4().hex[:12]
        for index, (function, args, kwargs) in enumerate(tasks):
            target = functools.partial(function, **kwargs) if kwargs else function
            futures.append(client.submit(target, *args, key=f"robustff-chunk-{index}-{run}",
                                         retries=TASK_RETRIES, pure=False))
        for index in range(len(futures)):
            result = _await(client, futures[index], address, grace, index, len(futures))
            if result is _STOP:
                return
            futures[index] = None  # the cluster may forget a chunk once it is read
            yield result
    finally:
        pending = [future for future in futures if future is not None]
        try:
            if pending:
                client.cancel(pending)
            client.close(timeout=5)
        except Exception:  # the cluster is already gone: nothing left to tidy up
            pass


_STOP = object()


class _NoTraceback(logging.Filter):
    """Dask's own log records on one line: an exception's traceback becomes its last line."""

    def filter(self, record: logging.LogRecord) -> bool:
        if record.exc_info and record.exc_info[1] is not None:
            error = record.exc_info[1]
            text = record.getMessage().strip()
            record.msg = f"{text} ({type(error).__name__}: {error})" if text else (
                f"{type(error).__name__}: {error}")
            record.args = ()
            record.exc_info = None
            record.exc_text = None
        record.stack_info = None
        return True


@contextlib.contextmanager
def _one_line_logs() -> Iterator[None]:
    """While the run lasts, Dask's client logs (a lost connection, a rescheduled chunk) reach
    the user as one line each, without the tracebacks Dask attaches to them."""
    root = logging.getLogger("distributed")
    handlers = list(root.handlers) + list(logging.getLogger().handlers)
    one_line = _NoTraceback()
    for handler in handlers:
        handler.addFilter(one_line)
    try:
        yield
    finally:
        for handler in handlers:
            handler.removeFilter(one_line)


def _await(client, future, address: str, grace: float, index: int, total: int):
    """The chunk's result, or ``_STOP`` (after one warning) when the cluster cannot go on."""
    from distributed.client import FutureCancelledError
    from distributed.comm.core import CommClosedError
    from distributed.scheduler import KilledWorker

    alone_since = None
    while True:
        try:
            return future.result(timeout=_POLL)
        except TimeoutError:
            pass
        except KilledWorker as exc:
            return _stop(address, index, total,
                         f"chunk {index + 1} was lost with every worker that ran it ({exc})")
        except (FutureCancelledError, CommClosedError, OSError) as exc:
            return _stop(address, index, total, f"the cluster dropped chunk {index + 1} ({exc})")
        try:
            workers = len(client.nthreads())
        except (CommClosedError, OSError, TimeoutError) as exc:
            return _stop(address, index, total, f"the scheduler does not answer ({exc})")
        if workers:
            alone_since = None
        elif alone_since is None:
            alone_since = time.monotonic()
        elif time.monotonic() - alone_since > grace:
            return _stop(address, index, total, f"no worker has been left for {grace:g} s")


def _stop(address: str, index: int, total: int, reason: str):
    reason = " ".join(reason.split())  # Dask's messages may run over several lines
    _log.warning(
        "robustff: --cluster %s: %s; stopping with %d of %d chunks finished (kept, marked "
        "partial)", address, reason, index, total,
    )
    return _STOP
