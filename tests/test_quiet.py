"""Prints silenced in one thread (pygam's "did not converge" inside the additive fit) must not
swallow another thread's output: the explorer fits on a worker thread while a cell prints."""
import io
import sys
import threading

import numpy as np

import summarize_widgets as sw
from summarize_widgets.core.quiet import quiet_stdout
from summarize_widgets.summaries import additive

from conftest import household_covariates


def test_quiet_stdout_drops_only_the_threads_inside():
    out = io.StringIO()
    real, sys.stdout = sys.stdout, out
    try:
        inside, go_on = threading.Event(), threading.Event()

        def worker():
            with quiet_stdout():
                print("from the worker")
                inside.set()
                go_on.wait(10)
                print("from the worker again")

        t = threading.Thread(target=worker)
        t.start()
        assert inside.wait(10)
        print("from the main thread")
        go_on.set()
        t.join(10)
        assert sys.stdout is out  # the proxy is gone once no thread is silenced
    finally:
        sys.stdout = real
    assert out.getvalue() == "from the main thread\n"


def test_a_print_while_another_thread_fits_the_additive_summary_is_kept(monkeypatch):
    rng = np.random.default_rng(8)
    X = household_covariates(300, rng)
    draws = sw.EffectDraws(rng.normal(size=(20, 300)) + X["age"].to_numpy() / 50, X)
    fitting, printed = threading.Event(), threading.Event()
    real_fit = additive._pygam_model

    def slow_model(*args, **kwargs):  # the fit pauses while pygam's prints are silenced
        gam = real_fit(*args, **kwargs)
        fit = gam.fit

        def paused_fit(*a, **k):
            fitting.set()
            printed.wait(10)
            return fit(*a, **k)
        gam.fit = paused_fit
        return gam

    monkeypatch.setattr(additive, "_pygam_model", slow_model)
    out = io.StringIO()
    real, sys.stdout = sys.stdout, out
    try:
        t = threading.Thread(target=lambda: sw.summarize_additive(draws, progress=False))
        t.start()
        assert fitting.wait(30)
        print("EXPECTED 42")
        printed.set()
        t.join(60)
    finally:
        sys.stdout = real
    assert "EXPECTED 42" in out.getvalue()
