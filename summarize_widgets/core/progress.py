"""Progress of long passes over the draws.

A pass reports ``(done_blocks, total_blocks)``. When the caller gives no callback, a tqdm
bar appears for passes that take longer than :data:`BAR_DELAY` seconds (``tqdm.auto``: a
text bar in a terminal, a widget bar in Jupyter); short passes print nothing. On a Dask
cluster the bar counts finished blocks and names the cluster's dashboard, where Dask's own
per-task progress is shown.
"""
from __future__ import annotations

import contextlib
import os

__all__ = ["pass_progress", "BAR_DELAY"]

#: Seconds a pass runs before its bar appears (shorter passes stay silent).
BAR_DELAY = 2.0


@contextlib.contextmanager
def pass_progress(draws, progress=None, *, total: int | None = None, note: str = ""):
    """Yield ``tick(done, total)``: the caller's callback, or a tqdm bar shown after BAR_DELAY s.

    ``progress=False`` (or the environment variable ``SUMMARIZE_WIDGETS_PROGRESS=0``)
    silences the bar.
    """
    if callable(progress):
        yield progress
        return
    if progress is False or os.environ.get("SUMMARIZE_WIDGETS_PROGRESS", "1") == "0":
        yield lambda done, total: None
        return
    from tqdm.auto import tqdm

    state = {"bar": None}

    def tick(done, n):
        bar = state["bar"]
        if bar is None:
            desc = f"pass over {draws.n_draws} draws x {draws.n_units} units"
            bar = state["bar"] = tqdm(total=n, desc=desc, unit="block", delay=BAR_DELAY, leave=False,
                                      postfix=note or None)
        bar.update(done - bar.n)

    try:
        yield tick
    finally:
        if state["bar"] is not None:
            state["bar"].close()
