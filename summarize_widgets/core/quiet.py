"""Silence a library's prints in one thread without losing other threads' output.

``contextlib.redirect_stdout`` swaps ``sys.stdout`` for the whole process: while the explorer
fits its additive summary on a worker thread, a notebook cell's own ``print`` went into the
swallowed stream and was lost. :func:`quiet_stdout` instead puts a proxy on ``sys.stdout`` that
drops only the writes of the threads inside the block and passes every other write through.
"""
from __future__ import annotations

import contextlib
import sys
import threading

__all__ = ["quiet_stdout"]

_lock = threading.Lock()
_quiet: set[int] = set()  # ids of the threads being silenced


class _Proxy:
    """``sys.stdout`` while some thread is silenced: drops that thread's writes, passes the rest."""

    def __init__(self, stream):
        self._stream = stream

    def write(self, text):
        if threading.get_ident() in _quiet:
            return len(text)
        return self._stream.write(text)

    def flush(self):
        if threading.get_ident() not in _quiet:
            self._stream.flush()

    def __getattr__(self, name):
        return getattr(self._stream, name)


@contextlib.contextmanager
def quiet_stdout():
    """Drop what the current thread prints inside the block; other threads print as usual."""
    me = threading.get_ident()
    with _lock:
        if not isinstance(sys.stdout, _Proxy):
            sys.stdout = _Proxy(sys.stdout)
        _quiet.add(me)
    try:
        yield
    finally:
        with _lock:
            _quiet.discard(me)
            if not _quiet and isinstance(sys.stdout, _Proxy):
                sys.stdout = sys.stdout._stream
