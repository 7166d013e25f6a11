"""Peak memory of the running process, for the benchmarks' child processes."""

from __future__ import annotations

import resource


def peak_kb() -> int:
    """The process's peak resident set since it started its program (kB).

    Linux keeps the peak of the process before `exec` in getrusage's
    ru_maxrss, so a child started by a parent of 200 MB reports at least
    200 MB whatever it uses itself; /proc/self/status's VmHWM belongs to the
    new program alone.  ru_maxrss where there is no /proc.
    """
    try:
        with open("/proc/self/status") as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1])
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
