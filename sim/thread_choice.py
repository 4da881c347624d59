"""Whether a World's physics should use numba's threads, decided by the clock as it runs.

Threads pay off on an idle machine (two cores: about 1.3x to 1.9x on a large batch) and cost
dearly on a busy one: a parallel region waits for its slowest thread, and idle threads spinning
between regions take the core the rest of the control tick needs (seen here: a 1000-robot loop
2.5x slower with threads than without while another process held one core). The choice is
the caller's clock: :class:`ThreadChoice` times whole control ticks (one ``advance`` call to
the next, so the Python around the physics counts too) in the mode it runs, tries the other
mode now and then, and keeps whichever is faster. Both modes give the same numbers bit for bit,
so the choice changes speed only.
"""

from __future__ import annotations

import threading
import time

import numba

#: every this many ticks, one tick runs in the other mode to keep its time current
PROBE_EVERY = 200
#: weight of the newest tick in each mode's running mean
_WEIGHT = 0.2


class ThreadChoice:
    """Picks serial or threaded physics for one World, tick by tick."""

    def __init__(self) -> None:
        self._mean = {False: None, True: None}
        self._calls = 0
        self._last: tuple[float, bool] | None = None

    def threaded(self) -> bool:
        """Whether this tick's physics should run on threads."""
        now = time.perf_counter()
        if self._last is not None:
            start, mode = self._last
            spent = now - start
            mean = self._mean[mode]
            self._mean[mode] = spent if mean is None else mean + _WEIGHT * (spent - mean)
        if numba.get_num_threads() < 2 or threading.current_thread() is not threading.main_thread():
            # numba's thread pool is entered from the main thread only (its workqueue layer
            # is not re-entrant from other threads)
            self._last = None
            return False
        self._calls += 1
        best = self._best()
        mode = (not best) if self._calls % PROBE_EVERY == 0 else best
        self._last = (now, mode)
        return mode

    def _best(self) -> bool:
        serial, threaded = self._mean[False], self._mean[True]
        if threaded is None or serial is None:
            return True  # until both are known, threads (the other mode is probed soon)
        return threaded < serial
