"""The Dask backend of the pair engine: the same pass, its cell-pair tasks shared among workers.

``address`` is a scheduler address (``tcp://host:port``) or ``local:N`` for a local cluster of N
worker processes on this machine. The point arrays are sent to every worker once; the tasks (already
sorted by work) are dealt into chunks in turn, each chunk runs the single-thread pass on a worker, and
the chunks' sums are added in chunk order. Pair counts equal the local run's exactly and sums agree to
round-off (the order of additions differs).
"""

from __future__ import annotations

import numpy as np

from .errors import UsageError
from .pairs import _kernels as kernels

MAX_LOCAL_WORKERS = 64  # worker processes of a local cluster: each holds the points; more only thrash


def _chunk_pass(data, tasks):
    """Run on a worker: the single-thread pass over some tasks."""
    sums, candidates, accepted = kernels.pair_pass(
        1, tasks, data["cell_start"], data["x"], data["y"], data["z"], data["hole"], data["depth"],
        data["values"], data["weights"], data["layout"], data["params"], data["directions"], data["dir_params"],
        data["dir_lookup"],
        int(data["n_slots"]), int(data["n_columns"]))
    return sums, int(candidates), int(accepted)


def client_for(address: str):
    """A Dask client for ``address``; with ``local:N`` it starts (and owns) a local cluster."""
    try:
        from dask.distributed import Client, LocalCluster
    except ImportError:
        raise UsageError("--dask needs the dask and distributed packages: pip install 'dask[distributed]'.") from None
    if address.startswith("local:"):
        try:
            workers = int(address.split(":", 1)[1])
        except ValueError:
            raise UsageError(f"--dask {address!r}: write local:N with N worker processes.") from None
        if not 1 <= workers <= MAX_LOCAL_WORKERS:
            raise UsageError(f"--dask {address!r}: give local:N with N from 1 to {MAX_LOCAL_WORKERS} worker processes.")
        cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None)
        return Client(cluster), cluster
    if "://" not in address or not address.split("://", 1)[1]:
        raise UsageError(f"--dask {address!r}: give a scheduler address such as tcp://host:8786, or local:N for N "
                         "local worker processes.")
    try:
        return Client(address, timeout=30), None
    except (OSError, ValueError, TimeoutError) as exc:
        raise UsageError(f"--dask {address!r}: cannot reach the scheduler ({exc}).") from None


def run_on_dask(index, values, plan, address: str, chunks_per_worker: int = 4, weights=None):
    """Like ``PairIndex.run``, on a Dask cluster: (sums, candidate pairs, pairs within reach)."""
    v = index.sorted_values(values)
    w = index.sorted_weights(weights)
    layout, params = kernels.kernel_arguments(plan, v.shape[1], weighted=len(w) > 0)
    n_columns = kernels.N_STATS * v.shape[1] + v.shape[1] * (v.shape[1] - 1)
    data = {"cell_start": index.cell_start, "x": index.x, "y": index.y, "z": index.z, "hole": index.hole,
            "depth": index.depth, "values": v, "weights": w, "layout": layout, "params": params,
            "directions": plan.directions, "dir_params": plan.dir_params, "dir_lookup": plan.dir_lookup,
            "n_slots": plan.n_slots, "n_columns": n_columns}
    client, cluster = client_for(address)
    try:
        workers = max(1, len(client.scheduler_info().get("workers", {})))
        n_chunks = max(1, min(len(index.tasks), workers * chunks_per_worker))
        shared = client.scatter(data, broadcast=True)
        futures = [client.submit(_chunk_pass, shared, np.ascontiguousarray(index.tasks[c::n_chunks]), pure=False)
                   for c in range(n_chunks)]
        results = client.gather(futures)
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
    sums = np.zeros((plan.n_slots, n_columns))
    for part, _, _ in results:  # in chunk order: the same sums for the same cluster size
        sums += part
    return sums, sum(r[1] for r in results), sum(r[2] for r in results)
