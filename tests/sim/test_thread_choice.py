"""The physics thread choice follows the clock: it keeps whichever mode makes ticks shorter."""

from __future__ import annotations

import numba
import pytest

import sim.thread_choice as tc


class FakeClock:
    """A perf_counter whose ticks cost ``cost[mode]`` seconds in the mode last chosen."""

    def __init__(self, cost):
        self.now = 0.0
        self.cost = cost
        self.mode = None

    def __call__(self):
        return self.now

    def tick(self, mode):
        self.mode = mode
        self.now += self.cost[mode]


@pytest.mark.parametrize("serial_cost,threaded_cost,expect", [(2e-3, 1e-3, True), (1e-3, 3e-3, False)])
def test_keeps_the_faster_mode(monkeypatch, serial_cost, threaded_cost, expect):
    if numba.get_num_threads() < 2:
        pytest.skip("one numba thread: the choice is always serial")
    clock = FakeClock({False: serial_cost, True: threaded_cost})
    monkeypatch.setattr(tc.time, "perf_counter", clock)
    choice = tc.ThreadChoice()
    modes = []
    for _ in range(5 * tc.PROBE_EVERY):
        m = choice.threaded()
        modes.append(m)
        clock.tick(m)
    late = modes[2 * tc.PROBE_EVERY :]
    # after the first probe, the faster mode everywhere but the periodic probes
    assert sum(m == expect for m in late) == len(late) - len(late) // tc.PROBE_EVERY


def test_serial_off_the_main_thread():
    import threading

    out = []
    t = threading.Thread(target=lambda: out.append(tc.ThreadChoice().threaded()))
    t.start()
    t.join()
    assert out == [False]
