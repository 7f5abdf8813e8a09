"""Nonuniform 1D mesh: nodes on every interface, sheet and quantum-region end.

Between two consecutive key points the step starts at ``fine``, grows
geometrically by ``growth`` towards the middle of the segment and is capped by
``step`` inside quantum regions (where wavefunctions must be resolved) or by
``bulk_step`` in classical parts.  A 1 µm classical buffer therefore costs a
few hundred nodes, not thousands, while every interface is resolved finely.

Finite-volume bookkeeping (used by every kernel):

* ``h[c] = z[c+1] - z[c]`` cell widths (N-1); each cell is one material;
* ``wl[i] = h[i-1]/2`` and ``wr[i] = h[i]/2`` half-cell widths (0 at the ends);
* ``w = wl + wr`` dual-cell widths; a node value of a per-cell property f is
  ``(wl*f[i-1] + wr*f[i]) / w``.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: defaults, relative to ``step`` (documented in the deck reference)
FINE_FRACTION = 0.25
BULK_FACTOR = 20.0
GROWTH = 1.2
#: the most nodes a deck's mesh may have unless the caller (``--max-nodes``) allows more: a
#: 10 µm stack at the default steps has a few thousand, and 2e6 already takes gigabytes
MAX_NODES = 2_000_000
#: memory a solve takes per mesh node, bytes: measured with tracemalloc, the peak of a solve of
#: inputs/hemt_4K.toml is 884 B per node at 1305 nodes and 852 B at 2367 (812 B per added node)
BYTES_PER_NODE = 900


@dataclass(frozen=True)
class Mesh:
    """Nodes ``z`` (N,) and the finite-volume widths of :func:`half_widths`: ``h`` (N-1,)
    cells, ``wl``, ``wr``, ``w`` (N,) half and dual cells (nm)."""

    z: np.ndarray
    h: np.ndarray
    wl: np.ndarray
    wr: np.ndarray
    w: np.ndarray

    @classmethod
    def from_nodes(cls, z) -> "Mesh":
        """The mesh of node positions ``z`` (strictly increasing, nm)."""
        z = np.asarray(z, dtype=float)
        return cls(z, *half_widths(z))

    @property
    def n(self) -> int:
        return self.z.size

    def index_of(self, z_nm: float) -> int:
        """Index of the node at ``z_nm`` (key points are exact nodes)."""
        i = int(np.argmin(np.abs(self.z - z_nm)))
        return i

    def part(self, i0: int, i1: int) -> "Mesh":
        """The mesh of nodes i0..i1 on their own (a quantum region: psi = 0 beyond its end
        nodes, so each end node has one half cell)."""
        return Mesh.from_nodes(self.z[i0:i1 + 1])


def half_widths(z: np.ndarray):
    """(h, wl, wr, w) for node positions z: the one definition of the finite-volume widths.

    ``h[c] = z[c+1] - z[c]`` (cells); ``wl[i] = h[i-1]/2`` and ``wr[i] = h[i]/2`` (half
    cells, 0 beyond the two ends); ``w = wl + wr`` (dual cells), so that ``sum(f * w)`` is
    the integral of a node density and ``sum(w) = z[-1] - z[0]``."""
    z = np.asarray(z, dtype=float)
    h = np.diff(z)
    wl = np.zeros_like(z)
    wr = np.zeros_like(z)
    wl[1:] = 0.5 * h
    wr[:-1] = 0.5 * h
    return h, wl, wr, wl + wr


def graded_steps(length: float, fine: float, cap: float, growth: float) -> np.ndarray:
    """Cell widths filling ``length``: ``fine`` at both ends, geometric growth, capped.

    Symmetric about the segment's middle; sums to ``length`` exactly (up to
    rounding, corrected in the last step).
    """
    if length <= 0:
        raise ValueError("segment length must be positive")
    fine = min(fine, cap)
    if length <= 2.0 * fine:
        n = 1 if length <= 1.25 * fine else 2
        return np.full(n, length / n)
    half = 0.5 * length
    # geometric part up to the cap, then constant
    n_grow = int(np.ceil(np.log(cap / fine) / np.log(growth))) + 1 if cap > fine else 1
    grow = np.minimum(fine * growth ** np.arange(n_grow), cap)
    csum = np.cumsum(grow)
    if csum[-1] >= half:
        k = int(np.searchsorted(csum, half)) + 1
        steps = grow[:k]
    else:
        extra = int(np.ceil((half - csum[-1]) / cap))
        steps = np.concatenate([grow, np.full(extra, cap)])
    steps = steps * (half / steps.sum())
    full = np.concatenate([steps, steps[::-1]])
    full[-1] = length - full[:-1].sum()
    return full


def graded_count(length: float, fine: float, cap: float, growth: float) -> int:
    """The number of cells :func:`graded_steps` puts in ``length``, without building them
    (the same arithmetic; a closed form where the geometric part would be long)."""
    if length <= 0:
        raise ValueError("segment length must be positive")
    fine = min(fine, cap)
    if length <= 2.0 * fine:
        return 1 if length <= 1.25 * fine else 2
    half = 0.5 * length
    ratio = np.log(cap / fine) / np.log(growth) if cap > fine else 0.0
    if ratio < 1e5:
        n_grow = int(np.ceil(ratio)) + 1 if cap > fine else 1
        csum = np.cumsum(np.minimum(fine * growth ** np.arange(n_grow), cap))
        if csum[-1] >= half:
            return 2 * (int(np.searchsorted(csum, half)) + 1)
        return 2 * (n_grow + int(np.ceil((half - csum[-1]) / cap)))
    # growth so close to 1 that the steps never reach the cap within a realistic mesh:
    # k steps fine * (g^k - 1) / (g - 1) reach half the segment
    g = float(growth)
    k = np.log1p(half * (g - 1.0) / fine) / np.log(g)
    return 2 * int(np.ceil(min(k, 1e18)))


def count_nodes(key_points, quantum_intervals, *, step: float, fine: float | None = None,
                bulk_step: float | None = None, growth: float | None = None) -> int:
    """The number of nodes :func:`build_mesh` would make for these arguments, computed without
    making them: the guard against a mesh that would not fit in memory asks first."""
    fine = step * FINE_FRACTION if fine is None else float(fine)
    bulk_step = max(step, step * BULK_FACTOR) if bulk_step is None else float(bulk_step)
    growth = GROWTH if growth is None else float(growth)
    kp = np.unique(np.asarray(key_points, dtype=float))
    n = 1
    for a, b in zip(kp[:-1], kp[1:]):
        mid = 0.5 * (a + b)
        inside = any(lo - 1e-12 <= mid <= hi + 1e-12 for lo, hi in quantum_intervals)
        n += graded_count(b - a, fine, step if inside else bulk_step, growth)
    return n


def _bytes_text(n):
    for unit, size in (("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if n >= size:
            return f"{n / size:.3g} {unit}"
    return f"{n:.0f} B"


def check_node_count(deck, key_points, quantum_intervals, max_nodes) -> int:
    """The node count of ``deck``'s mesh (:func:`count_nodes`); a DeckError at ``mesh.step``
    (exit 2) naming the count and the memory it would take when it exceeds ``max_nodes``."""
    from selfcon.errors import DeckError
    ms = deck.mesh
    n = count_nodes(key_points, quantum_intervals, step=ms.step, fine=ms.fine, bulk_step=ms.bulk_step,
                    growth=ms.growth)
    if n > max_nodes:
        err = deck.error if hasattr(deck, "error") else (lambda key, msg: DeckError(msg, key=key))
        raise err("mesh.step", f"the mesh would have {n:,} nodes, about {_bytes_text(n * BYTES_PER_NODE)} "
                  f"of memory, above the limit of {int(max_nodes):,} nodes; make mesh.step (now "
                  f"{ms.step:g} nm) or mesh.bulk_step larger, or allow more with --max-nodes")
    return n


def build_mesh(key_points, quantum_intervals, *, step: float, fine: float | None = None,
               bulk_step: float | None = None, growth: float | None = None) -> Mesh:
    """Mesh through all ``key_points`` (sorted unique, first = 0, last = total thickness).

    ``quantum_intervals``: list of (top, bottom) nm; segments inside one use ``step``
    as the cap, others ``bulk_step``.
    """
    fine = step * FINE_FRACTION if fine is None else float(fine)
    bulk_step = max(step, step * BULK_FACTOR) if bulk_step is None else float(bulk_step)
    growth = GROWTH if growth is None else float(growth)
    kp = np.unique(np.asarray(key_points, dtype=float))
    pieces = [kp[:1]]
    for a, b in zip(kp[:-1], kp[1:]):
        mid = 0.5 * (a + b)
        inside = any(lo - 1e-12 <= mid <= hi + 1e-12 for lo, hi in quantum_intervals)
        cap = step if inside else bulk_step
        steps = graded_steps(b - a, fine, cap, growth)
        pts = a + np.cumsum(steps)
        pts[-1] = b
        pieces.append(pts)
    z = np.concatenate(pieces)
    h, wl, wr, w = half_widths(z)
    for arr in (z, h, wl, wr, w):
        arr.flags.writeable = False
    return Mesh(z=z, h=h, wl=wl, wr=wr, w=w)


def uniform_mesh(total: float, step: float, key_points=()) -> Mesh:
    """A uniform mesh (for benchmarks): ``step`` everywhere, key points snapped exactly."""
    n = max(1, int(round(total / step)))
    z = np.linspace(0.0, total, n + 1)
    for p in key_points:
        i = int(np.argmin(np.abs(z - p)))
        z[i] = p
    z = np.unique(z)
    h, wl, wr, w = half_widths(z)
    return Mesh(z=z, h=h, wl=wl, wr=wr, w=w)
