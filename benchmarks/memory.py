"""Peak resident memory per stage on Linux: read VmHWM, then reset it through clear_refs."""
from __future__ import annotations

import resource


def _status_kib(key: str) -> float:
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith(key + ":"):
                return float(line.split()[1])
    return float("nan")


def reset_peak() -> bool:
    """Reset the process's peak RSS to its current RSS (Linux >= 4.0); False where not possible."""
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
        return True
    except OSError:
        return False


def peak_mib() -> float:
    """Peak RSS since the last reset [MiB] (whole-process peak where resets are not possible)."""
    v = _status_kib("VmHWM")
    if v != v:  # NaN: not Linux
        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    return v / 1024.0


class StagePeaks:
    """Peak memory of consecutive stages: call ``mark(name)`` at the end of each stage."""

    def __init__(self):
        self.peaks: dict[str, float] = {}
        self.process_peak = 0.0
        reset_peak()

    def mark(self, name: str) -> None:
        p = peak_mib()
        self.peaks[name] = max(self.peaks.get(name, 0.0), p)
        self.process_peak = max(self.process_peak, p)
        reset_peak()
