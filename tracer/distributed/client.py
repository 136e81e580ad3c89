"""Dask clients for everything that runs on a cluster: a dataset's items, one render's sample chunks.

A local cluster uses processes with one Dask thread each and sets ``NUMBA_NUM_THREADS`` in the
workers (Dask's nanny does not) so that workers x numba threads match the cores. It binds to
127.0.0.1 and starts no dashboard unless asked. Tasks are plain functions of this package
(imported on the worker), never numba dispatchers, and carry paths, not arrays.
"""

from __future__ import annotations

import contextlib
import os
import re

from ..errors import UserError

#: Seconds to wait for an existing scheduler before giving up with a one-line error.
CONNECT_TIMEOUT_SECONDS = 5

_ADDRESS = re.compile(r"^(tcp|tls)://[A-Za-z0-9_.\-]+:\d{1,5}$|^(tcp|tls)://\[[0-9A-Fa-f:]+\]:\d{1,5}$")


def check_scheduler_address(address: str) -> str:
    if not _ADDRESS.match(address or ""):
        raise UserError(f"--scheduler: {address!r} is not a scheduler address like tcp://HOST:8786")
    port = int(address.rsplit(":", 1)[1])
    if not 0 < port < 65536:
        raise UserError(f"--scheduler: port {port} out of range")
    return address


@contextlib.contextmanager
def client_for(workers: int | None, scheduler: str | None, dashboard: bool = False, numba_threads: int | None = None):
    import logging

    from distributed import Client, LocalCluster

    if scheduler is not None:
        check_scheduler_address(scheduler)
        try:
            client = Client(scheduler, timeout=f"{CONNECT_TIMEOUT_SECONDS}s")
        except (OSError, TimeoutError) as error:
            raise UserError(f"--scheduler: cannot reach {scheduler} within {CONNECT_TIMEOUT_SECONDS} s: {error}")
        try:
            yield client
        finally:
            client.close()
        return
    if workers is None or workers < 1:
        raise UserError(f"--workers: must be at least 1, got {workers}")
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    numba_threads = numba_threads or max(1, cores // workers)
    env = {"NUMBA_NUM_THREADS": str(numba_threads)}
    if "NUMBA_CACHE_DIR" in os.environ:
        env["NUMBA_CACHE_DIR"] = os.environ["NUMBA_CACHE_DIR"]
    options = dict(n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1", env=env,
                   memory_limit=0)
    if dashboard:
        options["dashboard_address"] = "127.0.0.1:8787"
    else:
        options["dashboard_address"] = ":0"
        options["scheduler_kwargs"] = {"dashboard": False}
    cluster = LocalCluster(**options)
    client = Client(cluster)
    try:
        yield client
    finally:
        logger = logging.getLogger("distributed")
        level = logger.level
        logger.setLevel(logging.CRITICAL)
        try:
            client.close()
            cluster.close()
        finally:
            logger.setLevel(level)


def warm_up() -> bool:
    """Compile (or load from the cache) the render kernel once per worker before items arrive."""
    import numpy as np

    from tracer.scene import Camera
    from tracer.rendering import render
    from tracer.scene import Scene
    from tracer.optics import TransferFunction
    from tracer.volumes import Volume

    volume = Volume(np.linspace(0, 1, 27, dtype=np.float32).reshape(3, 3, 3))
    tf = TransferFunction(np.array([0.0, 1.0]), np.array([0.0, 0.5]), np.array([0.0]), np.array([[0.5, 0.5, 0.5]]))
    camera = Camera(position=(1.0, -6.0, 1.0), target=(1.0, 1.0, 1.0), width=2, height=2)
    render(Scene(volume, tf, camera), spp=1)
    return True
