"""The benchmark's memory sampler sees a child process's memory as well as its own."""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import pytest

from sim.peak_memory import PeakMemory, tree_rss_bytes

pytestmark = pytest.mark.skipif(not Path("/proc/self/status").exists(), reason="needs /proc")


def test_peak_counts_a_child_holding_memory():
    base = tree_rss_bytes(os.getpid())
    hold = "import time; b = bytearray(200 * 2**20); b[::4096] = b'x' * len(b[::4096]); time.sleep(0.6)"
    with PeakMemory(period=0.02) as peak:
        child = subprocess.Popen([sys.executable, "-c", hold])
        time.sleep(0.4)
        child.wait()
    # the child's 200 MiB (every page touched) show on top of this process
    assert peak.peak_bytes > base + 150 * 2**20
