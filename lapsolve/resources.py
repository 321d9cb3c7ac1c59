"""Memory estimates checked before large allocations, and the memory available.

A request that would need more memory than the machine has free is refused with
a :class:`~lapsolve.errors.ResourceLimitError` *before* the work starts, instead
of thrashing or being killed by the kernel half-way. The element cap
(:data:`lapsolve.mesh.MAX_TRIANGLES`) is checked next to it.

The figures are peak resident memory per triangle, measured with
``resource.getrusage`` on ``lapsolve solve --out`` of a square with a circular
hole (Linux x86-64, numpy/scipy with OpenBLAS, solver ``auto``), rounded up by
about 25 %; ``docs/robustness.md`` lists the measurements.
"""

import logging
import os

from .errors import ResourceLimitError

log = logging.getLogger(__name__)

#: Peak bytes per triangle of a solve with ``lapsolve solve --out``, by element degree,
#: for the meshes where memory matters (the ``auto`` solver is iterative above
#: 150,000 DOFs). Measured: P1 1,445-1,495 (gmg, 0.5-2 M triangles), P2 3,000
#: (gmg, 0.5 M), P3 8,890 (amg, 0.13 M).
SOLVE_BYTES_PER_TRIANGLE = {1: 1_900, 2: 3_800, 3: 11_000}
#: Peak bytes per triangle of triangulating (``triangle`` plus the mesh arrays),
#: measured 212-223 at 0.8-3.1 M triangles.
MESH_BYTES_PER_TRIANGLE = 280
#: Peak bytes per triangle of the *refined* mesh during uniform refinement,
#: measured 96 at 2-8 M triangles.
REFINE_BYTES_PER_TRIANGLE = 120
#: Resident memory of the interpreter with lapsolve and its libraries imported
#: (measured 107 MB).
BASE_BYTES = 150 * 2**20


def available_memory():
    """Bytes of memory this process may still use, or None when unknown.

    The smaller of the kernel's ``MemAvailable`` (``/proc/meminfo``) and the room
    left under a cgroup v2 memory limit; without ``/proc``, free physical pages
    from ``os.sysconf``.
    """
    found = []
    meminfo = _read("/proc/meminfo")
    if meminfo:
        for line in meminfo.splitlines():
            if line.startswith("MemAvailable:"):
                found.append(int(line.split()[1]) * 1024)
                break
    limit, usage = _read("/sys/fs/cgroup/memory.max"), _read("/sys/fs/cgroup/memory.current")
    if limit and usage and limit.strip().isdigit() and usage.strip().isdigit():
        found.append(max(int(limit) - int(usage), 0))
    if not found:
        try:
            found.append(os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE"))
        except (ValueError, OSError, AttributeError):
            return None
    return min(found)


def _read(path):
    try:
        with open(path, encoding="ascii") as fh:
            return fh.read()
    except (OSError, UnicodeDecodeError):
        return None


def solve_bytes(n_triangles, order):
    """Estimated peak memory of solving on ``n_triangles`` with degree ``order``."""
    return BASE_BYTES + int(n_triangles) * SOLVE_BYTES_PER_TRIANGLE[int(order)]


def _gib(n):
    return f"{n / 2**30:.1f} GiB"


def check_memory(needed, what, hint="use a larger element size or fewer refinements"):
    """Refuse when ``needed`` bytes exceed the memory available now.

    Parameters
    ----------
    needed : int
        Estimated peak bytes of the work.
    what : str
        The work, for the message (e.g. "a P2 solve on 5,000,000 triangles").

    Raises
    ------
    ResourceLimitError
    """
    free = available_memory()
    log.debug("%s needs about %s; %s available", what, _gib(needed),
              "unknown" if free is None else _gib(free))
    if free is not None and needed > free:
        raise ResourceLimitError(f"{what} needs about {_gib(needed)} of memory but only "
                                 f"{_gib(free)} is available; {hint}")


def check_solve(n_triangles, order, what=None):
    """Element cap and memory check of a solve, before meshing or refining for it.

    Parameters
    ----------
    n_triangles : int or float
        Triangles of the mesh the solve will use (an estimate is fine).
    order : {1, 2, 3}
    what : str, optional
        How the mesh comes about, for the message.

    Raises
    ------
    ResourceLimitError
    """
    from .mesh import check_size

    what = what or "the mesh"
    count = check_size(n_triangles, what)
    check_memory(solve_bytes(count, order),
                 f"a P{order} solve on {count:,} triangles ({what})")
