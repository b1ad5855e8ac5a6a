"""Memory available on this machine, and refusals of requests that will not fit."""
from __future__ import annotations

import os

from .errors import MemoryLimitError

__all__ = ["available_memory_bytes", "check_memory", "format_bytes"]


def _machine_available() -> int:
    """MemAvailable from /proc/meminfo (Linux); otherwise physical memory from sysconf."""
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return int(os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_AVPHYS_PAGES"))
    except (ValueError, OSError, AttributeError):
        return 1 << 62


def _cgroup_room() -> int | None:
    """What this process's control group (cgroup v2 memory.max) still allows, or None without a limit."""
    try:
        with open("/sys/fs/cgroup/memory.max", encoding="ascii") as fh:
            limit = fh.read().strip()
        if limit == "max":
            return None
        with open("/sys/fs/cgroup/memory.current", encoding="ascii") as fh:
            used = int(fh.read().strip())
        return max(int(limit) - used, 0)
    except (OSError, ValueError):
        return None


def _address_space_room() -> int | None:
    """What the address-space limit (``ulimit -v``, RLIMIT_AS) still allows, or None without one."""
    try:
        import resource
        soft, _hard = resource.getrlimit(resource.RLIMIT_AS)
        if soft == resource.RLIM_INFINITY:
            return None
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("VmSize:"):
                    return max(int(soft) - int(line.split()[1]) * 1024, 0)
    except (ImportError, OSError, ValueError, IndexError):
        return None
    return None


def available_memory_bytes() -> int:
    """Memory a request may still take: the machine's available memory, lowered by this process's
    control-group limit and address-space limit when they are tighter."""
    room = [_machine_available(), _cgroup_room(), _address_space_room()]
    return min(r for r in room if r is not None)


def format_bytes(n: float) -> str:
    n = float(min(n, 2**1000))          # an exact integer of any size prints
    for unit in ("B", "KiB", "MiB", "GiB", "TiB"):
        if abs(n) < 1024 or unit == "TiB":
            return f"{n:.3g} {unit}" if unit != "B" else f"{int(n)} B"
        n /= 1024.0
    return f"{n:.3g} TiB"


_SOLVE_HINT = ("Use a coarser grid, the spectral scheme (accurate on far fewer points for smooth potentials), "
               "or fewer states.")


def check_memory(needed_bytes: int, *, what: str = "this request", fraction: float = 0.8,
                 hint: str = _SOLVE_HINT) -> None:
    """Raise MemoryLimitError if ``needed_bytes`` (an exact integer) exceeds ``fraction`` of the available memory."""
    avail = available_memory_bytes()
    if needed_bytes > fraction * avail:
        raise MemoryLimitError(
            f"{what} needs about {format_bytes(needed_bytes)}, but only {format_bytes(avail)} is available. {hint}")
