"""Peak resident memory of this process and every process it started (benchmarks only).

Samples ``/proc/<pid>/status`` (VmRSS) of the process tree every ``period`` seconds from a
background thread, so a batch's worker processes are counted with their parent. On a system
without ``/proc`` it falls back to ``resource.getrusage`` of this process alone.
"""

from __future__ import annotations

import os
import threading
from pathlib import Path


def tree_rss_bytes(pid: int) -> int:
    """Resident memory of process ``pid`` and its descendants now [bytes]."""
    total = 0
    stack, seen = [pid], set()
    while stack:
        p = stack.pop()
        if p in seen:
            continue
        seen.add(p)
        try:
            for line in Path(f"/proc/{p}/status").read_text().splitlines():
                if line.startswith("VmRSS:"):
                    total += int(line.split()[1]) * 1024
            for task in os.listdir(f"/proc/{p}/task"):
                stack += [int(c) for c in Path(f"/proc/{p}/task/{task}/children").read_text().split()]
        except (FileNotFoundError, ProcessLookupError, PermissionError):
            continue
    return total


class PeakMemory:
    """Context manager: ``peak_bytes`` of the process tree while the block ran."""

    def __init__(self, period: float = 0.05) -> None:
        self.period = period
        self.peak_bytes = 0
        self._stop = threading.Event()

    def __enter__(self) -> PeakMemory:
        self._proc = Path("/proc/self/status").exists()
        if self._proc:
            self._thread = threading.Thread(target=self._sample, daemon=True)
            self._thread.start()
        return self

    def _sample(self) -> None:
        pid = os.getpid()
        while not self._stop.is_set():
            self.peak_bytes = max(self.peak_bytes, tree_rss_bytes(pid))
            self._stop.wait(self.period)

    def __exit__(self, *exc: object) -> None:
        if self._proc:
            self._stop.set()
            self._thread.join()
        else:
            import resource

            self.peak_bytes = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
