"""Running dataset items on Dask distributed (the client and cluster: :mod:`tracer.distributed.client`)."""

from __future__ import annotations

from ..distributed.client import check_scheduler_address, client_for, warm_up
from .items import finish_chunked_reference, finish_record, render_item_inputs, render_reference_chunk

__all__ = ["check_scheduler_address", "client_for", "run_on_cluster"]


def run_on_cluster(plan, todo, plan_arguments, out_dir, finished, *, workers, scheduler, dashboard,
                   numba_threads=None) -> None:
    from distributed import as_completed

    with client_for(workers, scheduler, dashboard, numba_threads) as client:
        client.run(warm_up)
        chunked = plan.reference_chunks > 1
        futures = {}
        for item in todo:
            future = client.submit(render_item_inputs, *plan_arguments, item.index, str(out_dir), not chunked,
                                   pure=False, key=f"inputs-{item.item_id}")
            futures[future] = (item, "inputs", None)
            if chunked:
                for chunk in range(plan.reference_chunks):
                    future = client.submit(render_reference_chunk, *plan_arguments, item.index, chunk, pure=False,
                                           key=f"chunk{chunk}-{item.item_id}")
                    futures[future] = (item, "chunk", chunk)
        pending: dict[int, dict] = {}
        for future in as_completed(list(futures)):
            item, kind, chunk = futures.pop(future)
            result = future.result()
            state = pending.setdefault(item.index, {"partial": None, "chunks": []})
            if kind == "inputs":
                state["partial"] = result
            else:
                state["chunks"].append(result)
            complete = state["partial"] is not None and (not chunked or len(state["chunks"]) == plan.reference_chunks)
            if complete:
                partial = state["partial"]
                if chunked:
                    partial["reference"] = finish_chunked_reference(plan, item, state["chunks"], out_dir,
                                                                    partial["files"])
                finished(finish_record(plan, item, partial, out_dir))
                del pending[item.index]
