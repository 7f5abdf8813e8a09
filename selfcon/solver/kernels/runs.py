"""Numba kernel of the channel detection (selfcon/output/channels.py::candidate_runs): the
runs of nodes around the local density peaks inside the basins of a band edge, walked node
by node as that docstring defines them.  Arrays in, arrays out; nothing is compiled at
import time."""
import numba
import numpy as np


@numba.njit(cache=True)
def density_runs(u, dens, peak_fraction):
    """(R, 2) first and last node of every run, in the order the runs are claimed, before
    candidate_runs' floor on their sheet density.

    Basins: the nodes between the maxima of ``u`` (a cell rises or falls when its step
    exceeds 1e-12 max(max |u|, 1); a rising cell, flat ones, then a falling one cut at the
    middle of the top, which goes to the basin above).  In each basin, top first, the local
    peaks of ``dens`` (> 0 and >= both neighbours) from the highest down (ties in node
    order); a peak not in an earlier run grows its run on each side while the next node
    holds more than ``peak_fraction`` of the peak, does not rise away from it, stays in the
    basin and is in no earlier run.  Every run is claimed, whatever its sheet density."""
    n = dens.shape[0]
    out = np.empty((max(n, 1), 2), dtype=np.int64)
    if n == 0:
        return out[:0]
    starts = np.empty(n, dtype=np.int64)
    ends = np.empty(n, dtype=np.int64)
    nb = 0
    start = 0
    if n >= 3:
        top = 0.0
        for i in range(n):
            x = abs(u[i])
            if x != x:
                top = x
                break
            if x > top:
                top = x
        scale = top if not (1.0 > top) else 1.0          # Python's max(top, 1.0)
        tol = 1e-12 * scale
        prev = -1
        prev_rising = False
        for c in range(n - 1):
            step = u[c + 1] - u[c]
            rising = step > tol
            falling = step < -tol
            if rising or falling:
                if prev >= 0 and prev_rising and falling:
                    cut = (prev + 1 + c) // 2
                    starts[nb] = start
                    ends[nb] = cut
                    nb += 1
                    start = cut + 1
                prev = c
                prev_rising = rising
    starts[nb] = start
    ends[nb] = n - 1
    nb += 1
    taken = np.zeros(n, dtype=np.bool_)
    order = np.empty(n, dtype=np.int64)
    nr = 0
    for bi in range(nb):
        a = starts[bi]
        b = ends[bi]
        count = 0
        for p in range(a, b + 1):
            v = dens[p]
            if v > 0.0 and (p == 0 or dens[p - 1] <= v) and (p == n - 1 or dens[p + 1] <= v):
                j = count                     # highest first, ties in node order
                while j > 0 and dens[order[j - 1]] < v:
                    order[j] = order[j - 1]
                    j -= 1
                order[j] = p
                count += 1
        for t in range(count):
            p = order[t]
            if taken[p]:
                continue
            thr = peak_fraction * dens[p]
            i0 = p
            while i0 > a and thr < dens[i0 - 1] and dens[i0 - 1] <= dens[i0] and not taken[i0 - 1]:
                i0 -= 1
            i1 = p
            while i1 < b and thr < dens[i1 + 1] and dens[i1 + 1] <= dens[i1] and not taken[i1 + 1]:
                i1 += 1
            for i in range(i0, i1 + 1):
                taken[i] = True
            out[nr, 0] = i0
            out[nr, 1] = i1
            nr += 1
    return out[:nr]
