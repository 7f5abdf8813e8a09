"""Channels: where each kind of carrier is confined, which subbands belong where, and their figures.

A *channel* is a depth interval where one carrier kind (``"electron"`` or ``"hole"``) is
confined.  Everything here works on plain arrays of the converged solution (depths in
nm, densities in cm^-3, populations in cm^-2, energies in eV relative to the contacted
carrier's Fermi level, 0 eV; each carrier's own level is in its CarrierProfile), so it
can be tested on its own; :mod:`selfcon.output.assemble` feeds it a solved structure.

Auto-detection (:func:`detect`), for each carrier, on its band edge U(z) (Ec for
electrons, -Ev for holes, so that carriers sit in the minima of U) and density d(z):

1. the nodes are split into *basins* at the local maxima of U (a flat top is split at
   its middle);
2. in each basin, every local density peak, highest first, makes a candidate: the run of
   nodes around it where d exceeds ``PEAK_FRACTION`` = 1e-3 of that peak and falls away
   from it (not entering an earlier run); candidates holding less than ``FALLBACK_FLOOR_CM2`` = 1e3 cm^-2 are dropped;
3. a candidate whose density is mostly held by subbands belonging to other candidates (the
   tail of a neighbour's subbands beyond a barrier top) is dropped;
4. neighbouring candidates are merged (across layer boundaries) while the barrier between
   them, max U between them minus the higher of their two minima, is below
   ``MERGE_KT`` = 2 kT, and when most of their carriers sit in subbands they share (at
   most half of the |psi|^2 in either, more than half in both: a tunnel-coupled bilayer
   is one quantum system);
5. after attribution (below), a candidate is a channel when it holds at least
   ``CHANNEL_FLOOR_CM2`` = 1e8 cm^-2 of its own carriers (its subbands and classical
   carriers; the tail of a neighbour's subbands beyond a barrier top is not its own).
   When none does, the one holding most is kept if it holds at least 1e3 cm^-2, so a
   nearly depleted channel keeps its figures down to pinch-off.

Named channels (``[[channel]]`` tables of the deck, see :class:`Request`) span their
layers and replace the auto-detected channels of the same carrier they overlap.

Attribution: every subband goes to the channel of its carrier (electron states to
electron channels, heavy and light holes to hole channels) that holds the largest part
of its |psi|^2, provided that part exceeds ``ATTRIBUTION_SHARE`` = 1/2; otherwise to no
channel (index -1).  The multiband hole states (physics.hole_model kp4 / kp6) are
attributed the same way by their density at k_par = 0, the sum of |psi_j|^2 over the
basis components (:func:`kp_levels`).

A channel's sheet density is the population of its subbands, their tails outside the
interval included, plus the classical carriers (the density not held by subbands:
outside the quantum regions, X/L valleys) inside its interval.  So, per carrier,
sum over channels + subbands in no channel + classical carriers outside every channel
= integral of the density (:attr:`ChannelAnalysis.balance`).

Names: named channels keep the deck's name.  Auto-detected ones are ``electron1``,
``electron2``, ... and ``hole1``, ... numbered from the surface; a channel holding at
least ``LAYER_SHARE`` = 90 % of its carriers in one layer with a name of its own (not
the default ``layer<index>``) takes that layer's name, unless another channel would
take the same name.

The main channel: the first ``[[channel]]`` of the deck; without named channels, the
channel with the most carriers of the majority kind (the kind whose channels hold more),
leaving out a channel whose carriers sit mostly in a layer doped for them (donors for
electrons, acceptors for holes: :attr:`LayerSpan.feeds`) while another channel of that
kind exists.  The electrons an over-doped modulation-doping layer keeps are the parallel
channel of the design even where they outnumber the undoped channel's, and are reported
as such; a doped channel (a delta-doped or uniformly doped channel layer) is still the
main one when it is the only kind there is.

Occupied subbands (:func:`occupied`, the one definition every output uses): a subband
is occupied when its population is at least ``OCCUPIED_FRACTION`` = 1 % of its
channel's sheet density and at least ``OCCUPIED_CM2`` = 1e8 cm^-2 (a subband in no
channel is measured against all subband carriers of its kind).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from selfcon.constants import NM_PER_CM
from selfcon.solver.kernels import load

__all__ = ["CARRIERS", "BAND_CARRIER", "STATE_LABEL", "Levels", "CarrierProfile", "LayerSpan", "Request", "Channel",
           "ChannelAnalysis", "occupied", "occupied_states", "basins", "candidate_runs", "merge_runs",
           "drop_tails", "merge_coupled", "detect", "analyse", "layer_cells", "transitions", "kp_levels",
           "PEAK_FRACTION", "MERGE_KT", "CHANNEL_FLOOR_CM2", "FALLBACK_FLOOR_CM2", "ATTRIBUTION_SHARE", "LAYER_SHARE",
           "OCCUPIED_FRACTION", "OCCUPIED_CM2"]

CARRIERS = ("electron", "hole")
#: band -> the carrier kind of its states
BAND_CARRIER = {"electron": "electron", "heavy_hole": "hole", "light_hole": "hole",
                # the multiband hole states of physics.hole_model kp4 / kp6 (/subbands/hole_kp)
                "hole_kp": "hole",
                # the conduction valley sets of physics.quantum_valleys
                "x2_electron": "electron", "x4_electron": "electron", "l_electron": "electron"}
#: short state labels of each band (E0, HH1, X2_0, ...: the tables and warnings)
STATE_LABEL = {"electron": "E", "heavy_hole": "HH", "light_hole": "LH", "x2_electron": "X2_",
               "x4_electron": "X4_", "l_electron": "L", "hole_kp": "H"}
#: +1: the carrier's kinetic energy grows with the electron energy; -1: it falls (holes)
CARRIER_SIGN = {"electron": +1, "hole": -1}

PEAK_FRACTION = 1e-3          # a channel's run: density above this fraction of its basin's peak
MERGE_KT = 2.0                # neighbouring runs merge unless a barrier of this many kT separates them
CHANNEL_FLOOR_CM2 = 1e8       # an auto-detected channel holds at least this sheet density ...
FALLBACK_FLOOR_CM2 = 1e3      # ... except the largest, when none does, down to this one
ATTRIBUTION_SHARE = 0.5       # a subband belongs to a channel holding more than this part of |psi|^2
LAYER_SHARE = 0.9             # an auto-detected channel takes the name of a layer holding this part
OCCUPIED_FRACTION = 0.01      # occupied: population >= 1 % of its channel's ...
OCCUPIED_CM2 = 1e8            # ... and >= 1e8 cm^-2


def occupied(population, reference):
    """True where a subband is occupied: its population (cm^-2) is at least 1 % of
    ``reference`` (its channel's sheet density, cm^-2) and at least 1e8 cm^-2."""
    pop = np.asarray(population, dtype=float)
    ref = np.asarray(reference, dtype=float)
    return (pop >= OCCUPIED_CM2) & (pop >= OCCUPIED_FRACTION * ref)


def occupied_states(band: str, subbands: dict, channel_rows, shared: dict | None = None) -> np.ndarray:
    """:func:`occupied` for the states of one band of a result: each state against its
    channel's sheet density (``subbands[band].channel`` indexes ``channel_rows``, the rows of
    /channels); a state in no channel against all subband carriers of its kind (electrons,
    or heavy plus light holes).  ``shared``: a dict the calls for the bands of one result
    may share (the references of each carrier kind are then made once)."""
    sb = subbands[band]
    kind = BAND_CARRIER[band]
    rows = list(channel_rows or [])
    sheets = None if shared is None else shared.get(kind)
    if sheets is None:
        # (np.add.reduce: numpy.sum's own sum of a 1-D array, without its wrapper)
        kind_total = sum(float(np.add.reduce(np.asarray(v.occupation, dtype=float).ravel()))
                         for b, v in subbands.items() if BAND_CARRIER.get(b) == kind)
        sheets = np.array([float(r["sheet_density"]) for r in rows] + [kind_total])
        if shared is not None:
            shared[kind] = sheets
    ch = np.asarray(getattr(sb, "channel", None) if getattr(sb, "channel", None) is not None
                    else np.full(np.asarray(sb.energy).size, -1))
    ch = ch.astype(np.int64, copy=False)
    ref = sheets[np.where((ch >= 0) & (ch < len(rows)), ch, len(rows))]     # the last: no channel
    return occupied(sb.occupation, ref)


# --------------------------------------------------------------------------- inputs

@dataclass
class Levels:
    """One band's states: energies (eV, electron scale), populations (cm^-2),
    wavefunctions (N, k) with sum_i w_i psi_i^2 = 1, in-plane masses (m0).

    ``pair``: None when each state is a whole (spin-degenerate) subband; else (k,) the
    subband of each state, whose spin branches share a number (the Kramers pairs of the
    multiband holes, rows 2p and 2p + 1 of /subbands/hole_kp).  A channel's E1 - E0 and
    occupied count then go by subbands, not by branches."""

    band: str
    energy: np.ndarray
    occupation: np.ndarray
    psi: np.ndarray
    in_plane_mass: np.ndarray
    pair: np.ndarray | None = None

    def weighted(self, w) -> np.ndarray:
        """(N, k) w_i |psi_i,k|^2: each state's share of |psi|^2 per node, for the dual widths
        ``w`` (nm).  Computed once per ``w`` array (the attribution, the tail and coupling
        tests of one analysis all use it); the states must not change after the first call."""
        cached = self.__dict__.get("_weighted")
        if cached is None or cached[0] is not w:
            cached = (w, np.asarray(self.psi, dtype=float) ** 2 * np.asarray(w, dtype=float)[:, None], {})
            self.__dict__["_weighted"] = cached
        return cached[1]

    def squares(self) -> np.ndarray:
        """(k, N) |psi|^2 of each state as a contiguous row (computed once; the states must not
        change after the first call)."""
        out = self.__dict__.get("_squares")
        if out is None:
            out = self.__dict__["_squares"] = np.square(np.asarray(self.psi, dtype=float).T, order="C")
        return out

    def share(self, w, i0: int, i1: int) -> np.ndarray:
        """(k,) each state's part of its |psi|^2 on nodes i0..i1, sum_i w_i |psi_i,k|^2: the
        sums of :meth:`weighted`, each interval summed once (the tail test, the coupling
        test and the attribution of one analysis ask for the same intervals)."""
        p2 = self.weighted(w)
        sums = self.__dict__["_weighted"][2]
        key = (int(i0), int(i1))
        out = sums.get(key)
        if out is None:
            out = sums[key] = p2[key[0]:key[1] + 1].sum(axis=0)
        return out


@dataclass
class CarrierProfile:
    """One carrier kind at the nodes: its band edge (eV, electron scale: Ec for electrons,
    Ev for holes), its total density and the part of it not held by subbands (cm^-3), and
    its own Fermi level (eV, electron scale; the gate's for the minority carrier)."""

    edge: np.ndarray
    density: np.ndarray
    classical: np.ndarray
    fermi: float = 0.0


@dataclass(frozen=True)
class LayerSpan:
    name: str
    top_nm: float
    bottom_nm: float
    named: bool = True        # False: the default name layer<index>, never given to a channel
    feeds: tuple = ()         # the carriers its dopants supply (dopant_carriers)


def dopant_carriers(layer) -> tuple:
    """The carriers a layer's dopants supply: ``"electron"`` with donors (bulk or sheet),
    ``"hole"`` with acceptors (the one rule of the main channel and the parallel-conduction
    advice, selfcon.output.diagnostics).  ``layer``: a structure's layer."""
    out = []
    if layer.donors > 0 or layer.sheet_donors > 0:
        out.append("electron")
    if layer.acceptors > 0 or layer.sheet_acceptors > 0:
        out.append("hole")
    return tuple(out)


@dataclass(frozen=True)
class Request:
    """A channel named in the deck: its name, carrier and depth span (its layers)."""

    name: str
    carrier: str
    top_nm: float
    bottom_nm: float


# --------------------------------------------------------------------------- results

@dataclass
class Channel:
    name: str
    carrier: str
    i0: int                    # first and last node of the interval (inclusive)
    i1: int
    top_nm: float
    bottom_nm: float
    named: bool                # from a [[channel]] table of the deck
    sheet_density: float = 0.0           # cm^-2, subbands (tails included) + classical inside
    subband_density: float = 0.0         # cm^-2, population of its subbands
    classical_density: float = 0.0       # cm^-2, classical carriers inside the interval
    ground_energy: float = math.nan      # eV, E0 - EF in the carrier's own sense (> 0: empty side)
    spacing: float = math.nan            # eV, E1 - E0 of its own subbands (> 0)
    occupied_subbands: int = 0
    centroid_nm: float = math.nan
    in_plane_mass: float = math.nan      # m0, of its ground subband
    layer: str = ""                      # the layer holding most of its carriers
    states: list = field(default_factory=list)    # [(band, index), ...] lowest kinetic energy first

    def as_row(self) -> dict:
        return {"name": self.name, "carrier": self.carrier, "top_nm": self.top_nm,
                "bottom_nm": self.bottom_nm, "sheet_density": self.sheet_density,
                "ground_energy": self.ground_energy, "spacing": self.spacing,
                "occupied_subbands": int(self.occupied_subbands), "centroid_nm": self.centroid_nm,
                "in_plane_mass": self.in_plane_mass, "layer": self.layer, "named": bool(self.named)}


@dataclass
class ChannelAnalysis:
    channels: list                       # of Channel, by depth (top first)
    main: int                            # index of the main channel, -1 without channels
    attribution: dict                    # band -> (k,) int, index into channels or -1
    unattributed: dict                   # carrier -> cm^-2 held by subbands in no channel
    classical_outside: dict              # carrier -> cm^-2 classical carriers outside every channel
    total: dict                          # carrier -> cm^-2, integral of the density

    @property
    def main_channel(self) -> Channel | None:
        return self.channels[self.main] if self.main >= 0 else None

    def balance(self, carrier: str) -> float:
        """sum of channel densities + unattributed + classical outside - total (cm^-2)."""
        s = sum(c.sheet_density for c in self.channels if c.carrier == carrier)
        return s + self.unattributed.get(carrier, 0.0) + self.classical_outside.get(carrier, 0.0) \
            - self.total.get(carrier, 0.0)

    def by_name(self, name: str) -> Channel | None:
        for c in self.channels:
            if c.name == name:
                return c
        return None


# --------------------------------------------------------------------------- detection

def _sheet(w, dens, i0, i1) -> float:
    """Sheet density (cm^-2) of a node density (cm^-3) over nodes i0..i1 with dual widths w (nm)."""
    return float(np.dot(w[i0:i1 + 1], dens[i0:i1 + 1])) / NM_PER_CM


def basins(u) -> list[tuple[int, int]]:
    """Node ranges (inclusive) between the local maxima of ``u``, top to bottom.

    A maximum is where u stops rising and starts falling; a flat top is split at its
    middle node, which goes to the basin above it.  The ranges cover every node once.
    """
    u = np.asarray(u, dtype=float)
    n = u.size
    if n < 3:
        return [(0, n - 1)] if n else []
    d = np.diff(u)
    tol = 1e-12 * max(float(np.max(np.abs(u))), 1.0)
    rising, falling = d > tol, d < -tol          # the cells that are not flat
    nz = np.flatnonzero(rising | falling)
    a, b = nz[:-1], nz[1:]
    # rising cell a, then flat, then falling cell b: nodes a+1..b are the top
    cuts = ((a + 1 + b)[rising[a] & falling[b]] // 2).tolist()
    starts = [0] + [c + 1 for c in cuts]
    return list(zip(starts, cuts + [n - 1]))


def candidate_runs(w, u, density, *, floor_cm2: float = FALLBACK_FLOOR_CM2,
                   peak_fraction: float = PEAK_FRACTION) -> list[tuple[int, int]]:
    """Runs of nodes around the local density peaks, inside the basins of ``u``, top to bottom.

    Peaks are taken from the highest down; each run spans the nodes around its peak where
    the density exceeds ``peak_fraction`` of that peak and does not rise again, without
    leaving its basin or entering an earlier run.  Runs holding less than ``floor_cm2`` are left out.
    The nodes are walked by a kernel (selfcon/solver/kernels/runs.py::density_runs, the basins
    of :func:`basins` and this definition node by node; it was the largest part of the result's
    channel analysis in numpy), the sheet densities summed here as :func:`_sheet` sums them.
    """
    w = np.asarray(w, dtype=float)
    dens = np.ascontiguousarray(density, dtype=float)
    claimed = load("runs").density_runs(np.ascontiguousarray(u, dtype=float), dens, float(peak_fraction))
    return sorted((i0, i1) for i0, i1 in claimed.tolist() if _sheet(w, dens, i0, i1) >= floor_cm2)


def merge_runs(runs, u, kT: float, merge_kt: float = MERGE_KT) -> list[tuple[int, int]]:
    """Merge neighbouring runs while the barrier between them (max u between them minus the
    higher of their two minima) is below ``merge_kt`` kT."""
    u = np.asarray(u, dtype=float)
    # One pass, left to right: merging a pair only lowers the merged run's minimum, so a pair
    # to its left that did not merge never will (the barrier between them is unchanged and
    # the higher minimum can only drop); the pairs are merged in the same order as by
    # restarting the scan after each merge, without its quadratic count of array scans.
    runs = [list(r) for r in sorted(runs)]
    if len(runs) < 2:
        return [(int(a), int(b)) for a, b in runs]
    out = [runs[0]]
    low = float(u[runs[0][0]:runs[0][1] + 1].min())
    for b0, b1 in runs[1:]:
        a0, a1 = out[-1]
        top = float(u[a1:b0 + 1].max())
        low_b = float(u[b0:b1 + 1].min())
        if top - max(low, low_b) < merge_kt * kT:
            out[-1] = [a0, b1]
            low = float(u[a0:b1 + 1].min())
        else:
            out.append([b0, b1])
            low = low_b
    runs = out
    return [(int(a), int(b)) for a, b in runs]


def detect(z, w, edge, density, carrier: str, kT: float, *, floor_cm2: float = CHANNEL_FLOOR_CM2,
           peak_fraction: float = PEAK_FRACTION, merge_kt: float = MERGE_KT) -> list[tuple[int, int]]:
    """Channel intervals of one carrier from its band edge and density alone, as inclusive
    node ranges, top to bottom: :func:`candidate_runs` merged by :func:`merge_runs`.

    ``edge``: the carrier's band edge at the nodes (eV, electron scale: Ec or Ev);
    ``density``: its density (cm^-3); ``w``: dual widths (nm).  :func:`analyse` also drops
    the runs that only hold the tail of another channel's subbands before merging.
    """
    u = CARRIER_SIGN[carrier] * np.asarray(edge, dtype=float)
    runs = candidate_runs(w, u, density, floor_cm2=floor_cm2, peak_fraction=peak_fraction)
    return merge_runs(runs, u, kT, merge_kt)


def drop_tails(runs, w, density, levels) -> list[tuple[int, int]]:
    """Leave out the runs whose density is mostly (more than half) held by subbands that
    belong to other runs: the tail of a neighbour beyond a barrier top is not a channel."""
    w = np.asarray(w, dtype=float)
    dens = np.asarray(density, dtype=float)
    if not runs:
        return []
    foreign = np.zeros(len(runs))
    for lv in levels:
        k = np.asarray(lv.energy).size
        if k == 0:
            continue
        shares = np.array([lv.share(w, a, b) for a, b in runs])          # (R, k)
        best = shares.argmax(axis=0)
        owned = shares[best, np.arange(k)] > ATTRIBUTION_SHARE
        occ = np.asarray(lv.occupation, dtype=float)
        for j in range(len(runs)):
            other = owned & (best != j)
            foreign[j] += float((occ[other] * shares[j, other]).sum())
    raw = np.array([_sheet(w, dens, a, b) for a, b in runs])
    return [r for r, f, t in zip(runs, foreign, raw) if not f > 0.5 * t]


def merge_coupled(runs, w, density, levels) -> list[tuple[int, int]]:
    """Merge neighbouring runs whose carriers mostly sit in subbands they share: states with
    no more than half of their |psi|^2 in either run but more than half in the two together
    (a tunnel-coupled bilayer: symmetric and antisymmetric states spread over both) holding
    more than half of the two runs' carriers make them one channel.  A few warm states
    spread above a barrier do not."""
    w = np.asarray(w, dtype=float)
    dens = np.asarray(density, dtype=float)
    runs = [list(r) for r in sorted(runs)]
    # each band's sums over a run once (Levels.share), not once per pair of runs (a 100-well stack has 100 runs)
    bands = [(lv, np.asarray(lv.occupation, dtype=float)) for lv in levels if np.asarray(lv.energy).size]
    merged = True
    while merged and len(runs) > 1:
        merged = False
        for j in range(len(runs) - 1):
            (a0, a1), (b0, b1) = runs[j], runs[j + 1]
            shared = 0.0
            for lv, occ in bands:
                sa = lv.share(w, a0, a1)
                sb = lv.share(w, b0, b1)
                both = (sa <= ATTRIBUTION_SHARE) & (sb <= ATTRIBUTION_SHARE) & (sa + sb > ATTRIBUTION_SHARE)
                shared += float(np.sum(occ[both]))
            if shared > 0.5 * (_sheet(w, dens, a0, a1) + _sheet(w, dens, b0, b1)):
                runs[j] = [a0, b1]
                del runs[j + 1]
                merged = True
                break
    return [(int(a), int(b)) for a, b in runs]


def _node_range(z, top_nm, bottom_nm) -> tuple[int, int]:
    z = np.asarray(z, dtype=float)
    i0 = int(np.argmin(np.abs(z - top_nm)))
    i1 = int(np.argmin(np.abs(z - bottom_nm)))
    return i0, max(i1, i0)


# --------------------------------------------------------------------------- analysis

def layer_cells(z, layers) -> tuple[np.ndarray, np.ndarray]:
    """(cell widths (N-1,), the index into ``layers`` of each cell) of the nodes ``z`` (nm)
    and the :class:`LayerSpan` rows ``layers``: how :func:`analyse` finds the layer holding a
    channel's carriers."""
    return _layer_cells(z, layers)


def _layer_cells(z, layers) -> tuple[np.ndarray, np.ndarray]:
    """(cell widths (N-1,), the layer of each cell) of :func:`_layer_shares`."""
    z = np.asarray(z, dtype=float)
    zc = 0.5 * (z[:-1] + z[1:])
    bottoms = np.array([L.bottom_nm for L in layers])
    return np.diff(z), np.minimum(np.searchsorted(bottoms, zc), len(layers) - 1)


def _layer_shares(z, rho, layers, cells=None) -> np.ndarray:
    """Part of the integral of rho (trapezoid per cell) in each layer (``cells``: the
    :func:`_layer_cells` of z and layers, if computed already)."""
    h, idx = _layer_cells(z, layers) if cells is None else cells
    cell = 0.5 * h * (rho[:-1] + rho[1:])
    per = np.bincount(idx, weights=cell, minlength=len(layers))
    tot = float(per.sum())
    return per / tot if tot > 0 else per


def analyse(z, w, kT: float, profiles: dict, levels, layers=(), requests=(), *,
            layer_cells=None) -> ChannelAnalysis:
    """Channels of a converged solution.

    ``profiles``: carrier -> :class:`CarrierProfile` (carriers left out have no channels);
    ``levels``: the bands' :class:`Levels`; ``layers``: :class:`LayerSpan` rows top to bottom
    (for names); ``requests``: the deck's named channels in deck order (:class:`Request`);
    ``layer_cells``: the cell widths and the layer of each cell of ``z`` and ``layers``
    (:func:`layer_cells`), if made already.
    """
    z = np.asarray(z, dtype=float)
    w = np.asarray(w, dtype=float)
    levels = list(levels)
    requests = list(requests)
    # 1. intervals: named ones, then auto-detected ones that overlap no named channel of their carrier
    chans: list[Channel] = []
    for q in requests:
        i0, i1 = _node_range(z, q.top_nm, q.bottom_nm)
        chans.append(Channel(name=q.name, carrier=q.carrier, i0=i0, i1=i1, top_nm=float(z[i0]),
                             bottom_nm=float(z[i1]), named=True))
    for carrier in CARRIERS:
        prof = profiles.get(carrier)
        if prof is None:
            continue
        dens = np.asarray(prof.density, dtype=float)
        if float(np.dot(w, dens)) / NM_PER_CM < 0.5 * FALLBACK_FLOOR_CM2 and not dens.min() < 0:
            # no run can hold FALLBACK_FLOOR_CM2 when the whole profile holds less (the
            # holes of an n-type stack): candidate_runs would find none
            continue
        taken = [(c.i0, c.i1) for c in chans if c.named and c.carrier == carrier]
        u = CARRIER_SIGN[carrier] * np.asarray(prof.edge, dtype=float)
        runs = candidate_runs(w, u, prof.density, floor_cm2=FALLBACK_FLOOR_CM2)
        runs = drop_tails(runs, w, prof.density, [lv for lv in levels if BAND_CARRIER[lv.band] == carrier])
        mine = [lv for lv in levels if BAND_CARRIER[lv.band] == carrier]
        for i0, i1 in merge_coupled(merge_runs(runs, u, kT), w, prof.density, mine):
            if any(i0 <= b and a <= i1 for a, b in taken):
                continue
            chans.append(Channel(name="", carrier=carrier, i0=i0, i1=i1, top_nm=float(z[i0]),
                                 bottom_nm=float(z[i1]), named=False))
    chans.sort(key=lambda c: (c.i0, c.i1, c.carrier))

    # 2. attribution of every subband; an auto-detected candidate that then holds less than
    # the floor of its own carriers (say, the tail of a neighbour's subbands beyond the
    # barrier top) is no channel: drop it and attribute again
    while True:
        attribution = _attribute(chans, levels, w)
        own = _own_sheets(chans, levels, attribution, profiles, w)
        keep = [c.named or own[j] >= CHANNEL_FLOOR_CM2 for j, c in enumerate(chans)]
        if not any(keep) and not requests:
            # nothing reaches the floor (a nearly depleted stack): keep the candidate holding
            # most carriers of its own, if it holds at least FALLBACK_FLOOR_CM2, so that the
            # main channel's figures stay defined down to pinch-off
            j = int(np.argmax(own)) if own else -1
            keep = [k == j and own[j] >= FALLBACK_FLOOR_CM2 for k in range(len(chans))]
        if all(keep):
            break
        chans = [c for c, k in zip(chans, keep) if k]

    # 3. figures of every channel
    total, unattributed, outside = {}, {}, {}
    for carrier in CARRIERS:
        prof = profiles.get(carrier)
        if prof is None:
            continue
        dens = np.asarray(prof.density, dtype=float)
        cl = np.asarray(prof.classical, dtype=float)
        total[carrier] = float(np.dot(w, dens)) / NM_PER_CM
        mask = np.zeros(z.size, dtype=bool)
        for c in chans:
            if c.carrier == carrier:
                mask[c.i0:c.i1 + 1] = True
        outside[carrier] = float(np.dot(w[~mask], cl[~mask])) / NM_PER_CM
        unattributed[carrier] = 0.0
    for lv in levels:
        carrier = BAND_CARRIER[lv.band]
        if carrier in unattributed:
            occ = np.asarray(lv.occupation, dtype=float)
            unattributed[carrier] += float(occ[attribution[lv.band] < 0].sum())
    layer_share = []                 # part of each channel's carriers in its layer c.layer
    cells = (layer_cells if layer_cells is not None else _layer_cells(z, layers)) if layers else None
    for j, c in enumerate(chans):
        prof = profiles.get(c.carrier)
        cl = np.zeros(z.size) if prof is None else np.asarray(prof.classical, dtype=float)
        rho = np.zeros(z.size)
        rho[c.i0:c.i1 + 1] = cl[c.i0:c.i1 + 1]
        c.classical_density = _sheet(w, cl, c.i0, c.i1)
        mine = []             # (kinetic energy, band, index, energy, population, mass, subband)
        sign = CARRIER_SIGN[c.carrier]
        fermi = 0.0 if prof is None else float(prof.fermi)
        terms = [rho[None, :]]            # rho, then each state's population density, in order
        for lv in levels:
            if BAND_CARRIER[lv.band] != c.carrier:
                continue
            ks = (attribution[lv.band] == j).nonzero()[0]
            if ks.size == 0:
                continue
            energy, occ = np.asarray(lv.energy, dtype=float), np.asarray(lv.occupation, dtype=float)
            mass = np.asarray(lv.in_plane_mass, dtype=float)
            for k in ks.tolist():
                e = float(energy[k])
                sub = (lv.band, k if lv.pair is None else int(lv.pair[k]))
                mine.append((sign * (e - fermi), lv.band, k, e, float(occ[k]), float(mass[k]), sub))
            terms.append(lv.squares()[ks] * (occ[ks] * NM_PER_CM)[:, None])
        if len(terms) > 1:
            # rho + n_0 |psi_0|^2 + n_1 |psi_1|^2 + ..., added one state after the other: a
            # reduction over the rows (the outer axis) adds whole rows in order, the same sums as
            # a loop over the states (numpy sums pairwise only along the contiguous axis)
            rho = np.add.reduce(np.concatenate(terms, axis=0), axis=0)
        mine.sort(key=lambda t: t[0])
        c.states = [(t[1], t[2]) for t in mine]
        c.subband_density = float(sum(t[4] for t in mine))
        c.sheet_density = c.subband_density + c.classical_density
        # the figures go by subbands: the spin branches of one (a Kramers pair of the multiband
        # holes, degenerate at k_par = 0) are one subband with their summed population
        subs = list(dict.fromkeys(t[6] for t in mine))            # lowest first
        if mine:
            c.ground_energy = mine[0][0]                 # sign * (E0 - EF), the carrier's own EF
            masses = [t[5] for t in mine if t[6] == subs[0] and math.isfinite(t[5])]
            # the mean of the branches (np.mean adds a short list one by one, as sum does)
            c.in_plane_mass = (sum(masses) / len(masses) if len(masses) < 8 else float(np.mean(masses))) \
                if masses else math.nan
            if len(subs) > 1:
                c.spacing = next(t[0] for t in mine if t[6] == subs[1]) - mine[0][0]
        pop_of = {}
        for t in mine:                  # each subband's population, its branches in order
            pop_of[t[6]] = pop_of.get(t[6], 0) + t[4]
        pops = [pop_of[s] for s in subs]
        c.occupied_subbands = int(occupied(pops, c.sheet_density).sum())
        norm = float(np.dot(w, rho))
        if norm > 0:
            c.centroid_nm = float(np.dot(w, rho * z)) / norm
        elif mine:                                       # an empty channel: its ground state's <z>
            band, k = c.states[0]
            lv = next(v for v in levels if v.band == band)
            p2 = np.asarray(lv.psi[:, k], dtype=float) ** 2 * w
            c.centroid_nm = float(np.dot(p2, z) / max(float(p2.sum()), 1e-300))
        shares = _layer_shares(z, rho, layers, cells) if layers and norm > 0 else None
        if shares is not None:
            c.layer = layers[int(shares.argmax())].name
            layer_share.append(float(shares.max()))
        else:
            layer_share.append(0.0)
            if layers:
                mid = 0.5 * (c.top_nm + c.bottom_nm)
                c.layer = next((L.name for L in layers if L.top_nm <= mid <= L.bottom_nm), layers[-1].name)

    # 4. names of the auto-detected channels
    _name_auto(chans, layers, layer_share)

    # 5. the main channel
    main = -1
    if requests:
        main = next(j for j, c in enumerate(chans) if c.named and c.name == requests[0].name)
    elif chans:
        kind_total = {k: sum(c.sheet_density for c in chans if c.carrier == k) for k in CARRIERS}
        kind = max(CARRIERS, key=lambda k: kind_total[k])
        cand = [j for j, c in enumerate(chans) if c.carrier == kind]
        # not the carriers a doped layer keeps while another channel of the kind exists
        doped = {L.name for L in layers if kind in L.feeds}
        cand = [j for j in cand if chans[j].layer not in doped] or cand
        main = max(cand, key=lambda j: chans[j].sheet_density)
    return ChannelAnalysis(channels=chans, main=main, attribution=attribution, unattributed=unattributed,
                           classical_outside=outside, total=total)


def _attribute(chans, levels, w) -> dict:
    """band -> (k,) index of the channel of its carrier holding most of each state's |psi|^2
    (more than ATTRIBUTION_SHARE), else -1."""
    attribution = {}
    for lv in levels:
        carrier = BAND_CARRIER[lv.band]
        k = np.asarray(lv.energy).size
        idx = [j for j, c in enumerate(chans) if c.carrier == carrier]
        att = np.full(k, -1, dtype=np.int64)
        if idx and k:
            shares = np.array([lv.share(w, chans[j].i0, chans[j].i1) for j in idx])   # (C, k)
            best = shares.argmax(axis=0)
            ok = shares[best, np.arange(k)] > ATTRIBUTION_SHARE
            att[ok] = np.asarray(idx)[best[ok]]
        attribution[lv.band] = att
    return attribution


def _own_sheets(chans, levels, attribution, profiles, w) -> list[float]:
    """Each channel's sheet density (cm^-2): its subbands' population + classical inside."""
    out = []
    for j, c in enumerate(chans):
        prof = profiles.get(c.carrier)
        s = _sheet(w, np.asarray(prof.classical, dtype=float), c.i0, c.i1) if prof is not None else 0.0
        for lv in levels:
            if BAND_CARRIER[lv.band] == c.carrier:
                s += float(np.asarray(lv.occupation, dtype=float)[attribution[lv.band] == j].sum())
        out.append(s)
    return out


def _name_auto(chans, layers, layer_share) -> None:
    named_layers = {L.name for L in layers if L.named}
    taken = {c.name for c in chans if c.named}
    count = {k: 0 for k in CARRIERS}
    wanted = {}
    for j, c in enumerate(chans):
        if c.named:
            continue
        count[c.carrier] += 1
        c.name = f"{c.carrier}{count[c.carrier]}"
        if c.layer in named_layers and layer_share[j] >= LAYER_SHARE:
            wanted.setdefault(c.layer, []).append(j)
    for layer, js in wanted.items():
        if len(js) == 1 and layer not in taken and layer not in {c.name for c in chans}:
            chans[js[0]].name = layer


# --------------------------------------------------------------------------- transitions

def transitions(levels, w) -> dict:
    """Every e_n - hh_m and e_n - lh_m pair of the given bands.

    Returns arrays ``electron_state`` (index into the electron states), ``hole_band``
    (``"heavy_hole"`` or ``"light_hole"``), ``hole_state``, ``energy`` (E_e - E_h, eV) and
    ``overlap`` (|<psi_e|psi_h>|^2 = |sum_i w_i psi_e,i psi_h,i|^2).
    """
    by = {lv.band: lv for lv in levels}
    w = np.asarray(w, dtype=float)
    cols = {"electron_state": [], "hole_state": [], "energy": [], "overlap": []}
    bands = []                      # (hole band, number of pairs) in order
    e = by.get("electron")
    if e is not None and np.asarray(e.energy).size:
        pe = np.asarray(e.psi, dtype=float) * w[:, None]
        for band in ("heavy_hole", "light_hole"):
            h = by.get(band)
            if h is None or np.asarray(h.energy).size == 0:
                continue
            ov = (pe.T @ np.asarray(h.psi, dtype=float)) ** 2          # (ke, kh)
            ke, kh = ov.shape
            pairs = np.arange(ke * kh)
            cols["electron_state"].append(pairs // kh)          # np.repeat(arange(ke), kh)
            cols["hole_state"].append(pairs % kh)               # np.tile(arange(kh), ke)
            bands.append((band, ke * kh))
            cols["energy"].append((np.asarray(e.energy, float)[:, None]
                                   - np.asarray(h.energy, float)[None, :]).ravel())
            cols["overlap"].append(ov.ravel())
    out = {}
    for key in ("electron_state", "hole_state"):
        out[key] = np.concatenate(cols[key]).astype(np.int64) if cols[key] else np.zeros(0, np.int64)
    for key in ("energy", "overlap"):
        out[key] = np.concatenate(cols[key]) if cols[key] else np.zeros(0)
    # the band of every pair as object array slices (numpy's array() of the list of strings
    # took as long as the overlaps)
    out["hole_band"] = np.empty(sum(count for _, count in bands), dtype=object)
    start = 0
    for band, count in bands:
        out["hole_band"][start:start + count] = band
        start += count
    return out


# --------------------------------------------------------------------------- from a solved structure

@dataclass
class SolvedChannels:
    """What the result assembly needs: every band's states, their populations, the channels."""

    spectrum: dict          # band -> selfcon.solver.spectrum.BandSpectrum
    occupation: dict        # band -> (k,) cm^-2 (0 for states the loop did not populate)
    analysis: ChannelAnalysis
    transitions: dict


def requests_of(deck, structure) -> list[Request]:
    """The deck's ``[[channel]]`` tables as :class:`Request` rows (depths from the structure)."""
    out = []
    for spec in getattr(deck, "channels", ()) or ():
        top = structure.layers[spec.layers[0]].top
        bottom = structure.layers[spec.layers[-1]].bottom
        out.append(Request(name=spec.name, carrier=spec.carrier, top_nm=float(top), bottom_nm=float(bottom)))
    return out


def layer_spans(structure) -> list[LayerSpan]:
    return [LayerSpan(L.name, float(L.top), float(L.bottom), named=L.name != f"layer{L.index}",
                      feeds=dopant_carriers(L))
            for L in structure.layers]


def _spans_and_cells(structure) -> tuple:
    spans = tuple(layer_spans(structure))
    cells = _layer_cells(structure.z, spans) if spans else None
    if cells is not None:
        for a in cells:
            a.setflags(write=False)
    return spans, cells


def kp_levels(st, hk) -> Levels:
    """The multiband hole states of a solve (a selfcon.solver.kp.KpStates) as one band of
    :class:`Levels`, ``hole_kp``: energies at k_par = 0, populations (the k_par integral),
    psi the square root of the density at k_par = 0, sum_j |psi_j|^2 (normalised:
    sum_i w_i psi_i^2 = 1), the in-plane mass at EF (selfcon.solver.kp.subband_figures,
    NaN for a state that does not cross EF), and the Kramers pairs (rows 2p, 2p + 1, the
    pairing of /subbands/hole_kp/spin_splitting) as ``pair``."""
    from selfcon.constants import CM2_PER_NM2
    from selfcon.solver import kp
    dens = np.sum(np.abs(np.asarray(hk.psi0)) ** 2, axis=1)          # (N, k)
    norm = np.asarray(st.mesh.w, dtype=float) @ dens
    psi = np.sqrt(dens / np.where(norm > 0, norm, 1.0))
    k = dens.shape[1]
    mass = kp.subband_figures(hk.k_parallel, hk.dispersion, st.fermi_levels[1])["mass_fermi"]
    return Levels("hole_kp", np.asarray(hk.subband_energy, dtype=float),
                  np.asarray(hk.sheet, dtype=float) * CM2_PER_NM2, psi, np.asarray(mass, dtype=float),
                  pair=np.arange(k) // 2)


def from_structure(structure, phi, loop_states, *, n, p, classical_n, classical_p, edges,
                   requests=()) -> SolvedChannels:
    """Channels of a converged solve.

    ``n``, ``p``: node densities (cm^-3); ``classical_n``, ``classical_p``: their parts not
    held by the loop's subbands (cm^-3); ``edges``: {"electron": Ec, "hole": Ev} at the nodes
    (eV).  Every band is solved in every quantum region (selfcon.solver.spectrum).
    """
    from selfcon.constants import CM2_PER_NM2
    from selfcon.solver.spectrum import full_spectrum
    from selfcon.solver.statistics import subband_density
    st = structure
    efn, efp = st.fermi_levels                  # each carrier's own Fermi level
    spectrum = full_spectrum(st, phi, loop_states)
    occupation, levels = {}, []
    for band, bs in spectrum.items():
        occ = np.zeros(bs.energy.size)
        if bs.populated.any():
            sel = bs.populated
            occ[sel] = subband_density(bs.energy[sel], bs.dos[sel], st.temperature, bs.sign,
                                       efn if bs.sign > 0 else efp) * CM2_PER_NM2
        occupation[band] = occ
        levels.append(Levels(band, bs.energy, occ, bs.psi, bs.m_par))
    from selfcon.solver.steps import KP_BAND
    hk = loop_states.get(KP_BAND)
    if hk is not None and np.asarray(hk.subband_energy).size:
        levels.append(kp_levels(st, hk))        # the multiband holes replace the hole bands
    profiles = {"electron": CarrierProfile(edges["electron"], n, classical_n, efn),
                "hole": CarrierProfile(edges["hole"], p, classical_p, efp)}
    # the layers' spans and the layer of every cell: once per structure (read-only)
    from selfcon.model.structure import derived
    spans, cells = derived(st, "channel_layers", lambda: _spans_and_cells(st))
    an = analyse(st.z, st.mesh.w, st.kT, profiles, levels, spans, requests, layer_cells=cells)
    return SolvedChannels(spectrum=spectrum, occupation=occupation, analysis=an,
                          transitions=transitions(levels, st.mesh.w))
