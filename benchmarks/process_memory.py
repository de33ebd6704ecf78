"""Resident memory of this process, for the benchmarks that measure it (Linux /proc; elsewhere
``ru_maxrss``, an upper bound of the peak that cannot be reset)."""
from __future__ import annotations

import resource
import sys


def status_bytes(field: str) -> int | None:
    """A ``VmRSS``/``VmHWM`` figure from /proc/self/status in bytes (Linux), else None."""
    try:
        with open("/proc/self/status", encoding="ascii") as status:
            for line in status:
                if line.startswith(field + ":"):
                    return int(line.split()[1]) * 1024
    except OSError:
        return None
    return None


def reset_peak() -> bool:
    """Reset the kernel's peak-RSS mark of this process (Linux); False when not possible."""
    try:
        with open("/proc/self/clear_refs", "w", encoding="ascii") as refs:
            refs.write("5")
        return True
    except OSError:
        return False


def peak_bytes() -> int:
    """Peak resident set size: VmHWM on Linux, else ru_maxrss (KiB on Linux, bytes on macOS)."""
    peak = status_bytes("VmHWM")
    if peak is not None:
        return peak
    maxrss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return maxrss if sys.platform == "darwin" else maxrss * 1024
