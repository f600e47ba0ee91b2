"""Where an exploration's tasks run: a process pool on this machine, or a Dask cluster.

Both take the same tasks: a top-level function and a list of plain, picklable inputs, each
task independent of the others. ``map`` yields ``(index, result)`` as tasks finish; a task that
raises (or a worker lost under it) yields ``{"error": text}`` for that task alone. ``probe``
runs one function on every worker, to check each has the tools before any work is sent.
"""

import os
import re
from concurrent.futures import ProcessPoolExecutor, as_completed
from multiprocessing import get_context

from ..errors import ToolError

__all__ = ["LocalRunner", "DaskRunner", "make_runner", "CONNECT_TIMEOUT_S"]

CONNECT_TIMEOUT_S = 10
# A scheduler's address as `dask scheduler` prints it: tcp://host:port (or host:port).
_ADDRESS = re.compile(r"^(?:(?:tcp|tls|ws|wss)://)?(?:\[[0-9a-fA-F:]+\]|[\w.-]+):\d{1,5}$")


def _failure(error):
    return {"error": f"{type(error).__name__}: {error}".replace("\n", " ")}


class LocalRunner:
    """A pool of ``workers`` processes (default: one per core), started fresh (spawn) so that
    a worker shares no state with the caller."""

    def __init__(self, workers=None):
        if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int)
                                    or workers < 1):
            raise ToolError(f"--workers must be a positive whole number, not {workers!r}")
        self.workers = workers or os.cpu_count() or 1
        self.where = f"a local pool of {self.workers} process(es)"

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False

    def probe(self, function, argument):
        """``{worker: result}``: here the one machine, checked in this process."""
        return {"this machine": function(argument)}

    def map(self, function, items):
        if not items:
            return
        with ProcessPoolExecutor(max_workers=min(self.workers, len(items)),
                                 mp_context=get_context("spawn")) as pool:
            futures = {pool.submit(function, item): index for index, item in enumerate(items)}
            try:
                for future in as_completed(futures):
                    try:
                        yield futures[future], future.result()
                    except Exception as error:      # a worker process that died
                        yield futures[future], _failure(error)
            except BaseException:
                for future in futures:
                    future.cancel()
                raise


class DaskRunner:
    """The workers of a running Dask distributed scheduler at ``address``
    (``tcp://host:8786``); they need thresh2hdl and the tools installed."""

    def __init__(self, address, *, timeout_s=CONNECT_TIMEOUT_S):
        try:
            from distributed import Client
        except ImportError:
            raise ToolError("running on a Dask cluster needs dask.distributed: pip install "
                            "'thresh2hdl[cluster]'") from None
        self.address = address
        if not isinstance(address, str) or not _ADDRESS.match(address):
            raise ToolError(f"--scheduler {address!r} is not a scheduler address; give it as "
                            f"`dask scheduler` prints it, e.g. tcp://10.0.0.5:8786")
        try:
            self.client = Client(address, timeout=f"{timeout_s}s", set_as_default=False)
        except (OSError, TimeoutError, ValueError) as error:
            reason = str(error).splitlines()[0] if str(error) else type(error).__name__
            raise ToolError(f"cannot reach the Dask scheduler at {address} ({reason}); start "
                            f"one with `dask scheduler` and give its address") from None
        count = len(self.client.scheduler_info().get("workers", {}))
        if count == 0:
            self.client.close()
            raise ToolError(f"the Dask scheduler at {address} has no workers; start some with "
                            f"`dask worker {address}` where thresh2hdl is installed")
        self.where = f"the Dask scheduler at {address} ({count} worker(s))"

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.client.close()
        return False

    def probe(self, function, argument):
        """``{worker address: result}`` of ``function(argument)`` on every worker."""
        try:
            return self.client.run(function, argument)
        except Exception as error:
            raise ToolError(f"the Dask workers at {self.address} could not run thresh2hdl "
                            f"({type(error).__name__}: {error}); install it on every "
                            f"worker").with_traceback(None) from None

    def map(self, function, items):
        if not items:
            return
        from distributed import as_completed as finished
        futures = self.client.map(function, items, pure=False)
        index = {future.key: i for i, future in enumerate(futures)}
        try:
            for future in finished(futures, loop=self.client.loop):
                try:
                    yield index[future.key], future.result()
                except Exception as error:          # a worker lost, or the task unpicklable
                    yield index[future.key], _failure(error)
        except BaseException:
            self.client.cancel(futures)
            raise


def make_runner(scheduler=None, workers=None):
    """A Dask runner when a scheduler address is given, else the local pool."""
    if scheduler is not None:
        if workers is not None:
            raise ToolError("--workers is for the local pool; a Dask cluster's workers are "
                            "started with `dask worker`")
        return DaskRunner(scheduler)
    return LocalRunner(workers)
