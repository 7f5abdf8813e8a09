"""Gate-bias sweeps: n_s(V) per layer, subbands versus V, gate charge, C-V and threshold.

    sw = sweep_bias(deck, np.arange(-1.0, 0.31, 0.05), threshold_cm2=1e10)
    sw.analysis["threshold_extrapolated_V"], sw.capacitance, sw.save("cv.h5")

Every point is a full self-consistent solve of the deck with ``surface.bias`` set,
started from the converged potentials of the previous points, extrapolated linearly
through the last two (continuation, selfcon.solver.loop.extrapolate_potential; a point that
fails to converge from the warm start is retried from a cold start).

Definitions (stated in the file and in README.md, "Design recipes"):

* gate charge Q(V) = -q * integral of (p - n + Nd+ - Na- + the bound polarization charge of
  wurtzite interfaces) dz over the semiconductor
  (C/cm^2): the charge on the gate that balances the semiconductor's, assuming the
  substrate contact holds none of it.
* capacitance C = dQ/dV (F/cm^2) by ``numpy.gradient`` of the converged Q over the
  bias points (second order inside, first order at the ends).
* threshold (a), extrapolated: a straight line through the channel n_s(V) over the
  steepest window of ``LINEAR_POINTS`` consecutive points whose largest deviation from
  their own line is below ``LINEARITY`` (2 %) of the rise across the window; V_T is where
  that line reaches n_s = 0.  (b), crossing: the bias at which the channel n_s falls
  below the user threshold, interpolated linearly in log10(n_s) between the bracketing
  points.
* parallel-conduction onset: the lowest bias above which the electrons in the doping
  layers (layers with donors, the channel excluded; free electrons plus electrons bound
  on neutral donors, Nd - Nd+, so "the doping layer starts to fill") exceed ``fraction`` (1 %) of the
  channel n_s and 1e8 cm^-2 at every higher point; interpolated linearly.
* charge-control figures (Delagebeaudeuf and Linh, IEEE Trans. Electron Devices 29, 955,
  1982: n_s = eps/(q (d + dd)) (V - V_T)): d is the gate-to-channel distance, taken as
  the capacitive thickness eps_b * integral dz/eps(z) from the gate to the top of the
  channel layer, eps_b the permittivity just above the channel; dd = eps_b/(q slope) - d.
"""
from __future__ import annotations

import math
import os
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from selfcon.constants import CM2_PER_NM2, EPS0, NM_PER_CM, Q, Q_EPS0
from selfcon.errors import DeckError, SelfconInputError
from selfcon.model.mesh import Mesh, half_widths
from selfcon.output.numbers import fmt
from selfcon.output.schema import SWEEP

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

    from selfcon.input.deck import Deck
    from selfcon.output.result import Result

LINEAR_POINTS = 4
LINEARITY = 0.02
PARALLEL_FRACTION = 0.01
FLOOR_CM2 = 1e8
DEFAULT_THRESHOLD_CM2 = 1e10
MAX_POINTS = 2001
MAX_STATES = 10

SCHEMA = SWEEP.schema
SCHEMA_VERSION = SWEEP.version


class SweepError(SelfconInputError):
    """Bad sweep options (bias range, step, threshold)."""


@dataclass
class BiasSweep:
    """Everything one bias sweep produced.  Arrays are indexed by bias point (sweep order)."""

    title: str
    deck_text: str
    temperature: float
    bias: np.ndarray                      # (M,) V
    layer_names: list[str]
    layer_electrons: np.ndarray           # (M, L) cm^-2
    layer_holes: np.ndarray               # (M, L) cm^-2
    layer_donors: np.ndarray              # (M, L) cm^-2 ionised donors
    total_electrons: np.ndarray           # (M,) cm^-2
    total_holes: np.ndarray               # (M,) cm^-2
    channel_layer: str                    # the layer holding most of the main channel's carriers
    channel_density: np.ndarray           # (M,) cm^-2, the main channel's sheet density
    doping_layers: list[str]
    doping_free_electrons: np.ndarray     # (M,) cm^-2 free electrons in the doping layers
    doping_electrons: np.ndarray          # (M,) cm^-2 free electrons + electrons bound on neutral donors
    gate_charge: np.ndarray               # (M,) C/cm^2
    capacitance: np.ndarray               # (M,) F/cm^2
    subband_energy: dict[str, np.ndarray]      # band -> (M, K) eV (NaN padded)
    subband_occupation: dict[str, np.ndarray]  # band -> (M, K) cm^-2
    converged: np.ndarray                 # (M,) bool
    iterations: np.ndarray                # (M,) int
    warm_start: np.ndarray                # (M,) bool: converged from the previous point's potential
    z: np.ndarray                         # (N,) nm
    potential: np.ndarray                 # (M, N) V
    conduction_band: np.ndarray           # (M, N) eV
    warnings: list[list[str]]             # design warnings per point
    threshold_cm2: float
    fraction: float
    analysis: dict[str, Any] = field(default_factory=dict)
    results: list = field(default_factory=list)   # the Results, if keep_results=True
    channel: str = ""                     # the main channel followed (selfcon.output.channels)

    @property
    def all_converged(self) -> bool:
        return bool(np.all(self.converged))

    def save(self, path, *, force: bool = True) -> None:
        save_sweep(self, path, force=force)

    def plot(self, path, *, force: bool = True) -> None:
        plot_sweep(self, path, force=force)

    def lines(self) -> list[str]:
        """The analysis in plain lines (what the CLI prints)."""
        return analysis_lines(self)


# --------------------------------------------------------------------------- helpers

def bias_points(start: float, stop: float, step: float) -> np.ndarray:
    """Biases from ``start`` to ``stop`` inclusive every ``|step|`` (direction from start to stop)."""
    for name, v in (("--from", start), ("--to", stop), ("--step", step)):
        if not math.isfinite(v):
            raise SweepError(f"must be a finite number, got {v!r}", key=name)
    if step == 0:
        raise SweepError("must not be zero", key="--step")
    if start == stop:
        return np.array([float(start)])
    n = int(math.floor(abs(stop - start) / abs(step) + 1e-9)) + 1
    if n > MAX_POINTS:
        raise SweepError(f"gives {n} points (more than {MAX_POINTS}); use a larger step", key="--step")
    if n < 2:
        raise SweepError(f"is larger than the range {start:g} to {stop:g} V", key="--step")
    direction = 1.0 if stop > start else -1.0
    pts = start + direction * abs(step) * np.arange(n)
    if abs(pts[-1] - stop) > 1e-6 * abs(step):
        pts = np.append(pts, stop)        # the range is not a whole number of steps: end on `stop`
    pts[-1] = stop
    return np.round(pts, 12)


def semiconductor_charge(result) -> float:
    """q * integral of (p - n + Nd+ - Na- + bound polarization charge) dz in C/cm^2."""
    p = result.profile
    rho = p["hole_density"] - p["electron_density"] + p["ionized_donors"] - p["ionized_acceptors"]
    if "bound_charge" in p:            # wurtzite interfaces (results before them have none)
        rho = rho + p["bound_charge"]
    return float(Q * np.sum(rho * Mesh.from_nodes(result.z).w) / NM_PER_CM)


def _schottky_check(deck):
    if deck.surface.kind != "schottky":
        raise DeckError(f"a bias sweep needs a schottky gate at the surface, the deck has "
                        f"contact = {deck.surface.kind!r}", file=deck.path, key="surface.contact",
                        allowed="schottky")


def _doping_layer_indices(structure, channel: int) -> list[int]:
    return [L.index for L in structure.layers if (L.donors > 0 or L.sheet_donors > 0) and L.index != channel]


def capacitive_thickness(structure, channel: int) -> tuple[float, float]:
    """(d, eps_b): eps_b * integral dz/eps from the gate to the channel top (nm), eps_b above the channel."""
    top = structure.layers[channel].top
    h = np.asarray(structure.mesh.h)
    zc = 0.5 * (structure.z[:-1] + structure.z[1:])
    eps = np.asarray(structure.cell["eps"])
    above = zc < top
    if not np.any(above):
        return 0.0, float(eps[0])
    eps_b = float(eps[np.flatnonzero(above)[-1]])
    return float(eps_b * np.sum(h[above] / eps[above])), eps_b


# --------------------------------------------------------------------------- analysis

def linear_window(v: np.ndarray, n: np.ndarray, *, points: int = LINEAR_POINTS, linearity: float = LINEARITY):
    """Steepest well-conditioned straight window of n(v).  Returns dict or None.

    ``v`` ascending.  A window of ``points`` consecutive points is well conditioned when
    every point lies within ``linearity`` times the rise of the fitted line across the
    window, the slope is positive and every n is positive.
    """
    v = np.asarray(v, float)
    n = np.asarray(n, float)
    m = v.size
    k = min(points, m)
    if k < 2:
        return None
    best = None
    fallback = None
    for i in range(m - k + 1):
        vv, nn = v[i:i + k], n[i:i + k]
        if not np.all(np.isfinite(nn)):
            continue
        a, b = np.polyfit(vv, nn, 1)
        rise = a * (vv[-1] - vv[0])
        if a <= 0 or rise <= 0:
            continue
        dev = float(np.max(np.abs(nn - (a * vv + b))) / rise)
        cand = {"slope": float(a), "intercept": float(b), "window": (float(vv[0]), float(vv[-1])),
                "deviation": dev, "well_conditioned": bool(dev <= linearity and np.all(nn > 0))}
        if cand["well_conditioned"]:
            if best is None or a > best["slope"]:
                best = cand
        elif fallback is None or dev < fallback["deviation"]:
            fallback = cand
    return best if best is not None else fallback


def threshold_crossing(v: np.ndarray, n: np.ndarray, threshold: float):
    """Bias (V) where n falls below ``threshold`` coming down from the top bias; None if it does not."""
    v = np.asarray(v, float)
    n = np.asarray(n, float)
    above = n >= threshold
    if not np.any(above) or np.all(above):
        return None
    for i in range(v.size - 1, 0, -1):       # from the top bias down
        if above[i] and not above[i - 1]:
            n0, n1 = n[i - 1], n[i]
            if n0 > 0:
                t = (math.log10(threshold) - math.log10(n0)) / (math.log10(n1) - math.log10(n0))
            else:
                t = (threshold - n0) / (n1 - n0)
            return float(v[i - 1] + t * (v[i] - v[i - 1]))
    return None


def parallel_onset(v: np.ndarray, n_dop: np.ndarray, n_ch: np.ndarray, fraction: float):
    """(onset bias or None, 'between'|'below-range'|'none') — see the module docstring."""
    v = np.asarray(v, float)
    excess = np.asarray(n_dop, float) - np.maximum(fraction * np.asarray(n_ch, float), FLOOR_CM2)
    on = excess > 0
    if not on[-1]:
        return None, "none"
    i = v.size - 1
    while i > 0 and on[i - 1]:
        i -= 1
    if i == 0:
        return float(v[0]), "below-range"
    e0, e1 = excess[i - 1], excess[i]
    return float(v[i - 1] + (-e0) / (e1 - e0) * (v[i] - v[i - 1])), "between"


def analyse(sw: BiasSweep, structure) -> dict:
    order = np.argsort(sw.bias)
    v = sw.bias[order]
    ns = sw.channel_density[order]
    out: dict[str, Any] = {}
    ch = sw.layer_names.index(sw.channel_layer)
    d_nm, eps_b = capacitive_thickness(structure, ch)
    out["gate_channel_distance_nm"] = d_nm
    out["barrier_permittivity"] = eps_b
    lin = linear_window(v, ns)
    nan = float("nan")
    if lin is not None:
        slope = lin["slope"]
        out["linear_slope_cm2_per_V"] = slope
        out["linear_window_V"] = lin["window"]
        out["linear_deviation"] = lin["deviation"]
        out["linear_well_conditioned"] = lin["well_conditioned"]
        out["threshold_extrapolated_V"] = -lin["intercept"] / slope
        d_tot = eps_b / (Q_EPS0 * slope / CM2_PER_NM2)          # nm
        out["charge_control_thickness_nm"] = d_tot
        out["delta_d_nm"] = d_tot - d_nm
        out["linear_capacitance_F_cm2"] = Q * slope             # q dn_s/dV
        out["series_capacitance_F_cm2"] = eps_b * EPS0 / (d_tot * 1e-9) / 1e4
    else:
        out.update(linear_slope_cm2_per_V=nan, linear_window_V=(nan, nan), linear_deviation=nan,
                   linear_well_conditioned=False, threshold_extrapolated_V=nan,
                   charge_control_thickness_nm=nan, delta_d_nm=nan, linear_capacitance_F_cm2=nan,
                   series_capacitance_F_cm2=nan)
    vc = threshold_crossing(v, ns, sw.threshold_cm2)
    out["threshold_crossing_V"] = nan if vc is None else vc
    onset, how = parallel_onset(v, sw.doping_electrons[order], ns, sw.fraction)
    out["parallel_onset_V"] = nan if onset is None else onset
    out["parallel_onset_kind"] = how
    return out


def analysis_lines(sw: BiasSweep) -> list[str]:
    a = sw.analysis
    lines = []
    if math.isfinite(a.get("threshold_extrapolated_V", float("nan"))):
        w0, w1 = a["linear_window_V"]
        cond = "" if a.get("linear_well_conditioned") else " (no window was straight within 2 %: rough)"
        lines.append(f"threshold (linear extrapolation of channel n_s over {fmt(w0, 'V', sign=True)} .. {fmt(w1, 'V', sign=True)} V): "
                     f"V_T = {fmt(a['threshold_extrapolated_V'], 'V', sign=True)} V, "
                     f"dn_s/dV = {fmt(a['linear_slope_cm2_per_V'], 'sheet')} "
                     f"cm^-2/V{cond}")
        lines.append(f"charge control: d = {fmt(a['gate_channel_distance_nm'], 'nm')} nm gate to channel, "
                     f"d + dd = {fmt(a['charge_control_thickness_nm'], 'nm')} nm, "
                     f"dd = {fmt(a['delta_d_nm'], 'nm')} nm, C = {fmt(a['linear_capacitance_F_cm2'], 'capacitance')} "
                     "F/cm^2")
    else:
        lines.append("threshold (linear extrapolation): n_s(V) has no rising straight part in this range")
    if math.isfinite(a.get("threshold_crossing_V", float("nan"))):
        lines.append(f"threshold (channel n_s falls below {fmt(sw.threshold_cm2, 'sheet')} cm^-2): "
                     f"V = {fmt(a['threshold_crossing_V'], 'V', sign=True)} V")
    else:
        lo, hi = np.nanmin(sw.channel_density), np.nanmax(sw.channel_density)
        lines.append(f"threshold (n_s below {fmt(sw.threshold_cm2, 'sheet')} cm^-2): not crossed in this range "
                     f"(channel n_s from {fmt(lo, 'sheet')} to {fmt(hi, 'sheet')} cm^-2)")
    kind = a.get("parallel_onset_kind")
    if kind == "between":
        lines.append(f"parallel conduction onset (doping-layer electrons above {100 * sw.fraction:g} % of the "
                     f"channel): V = {fmt(a['parallel_onset_V'], 'V', sign=True)} V")
    elif kind == "below-range":
        lines.append(f"parallel conduction: the doping layers hold more than {100 * sw.fraction:g} % of the "
                     f"channel over the whole sweep (onset at or below {fmt(a['parallel_onset_V'], 'V', sign=True)} V)")
    else:
        lines.append("parallel conduction: none in this range (doping layers below "
                     f"{100 * sw.fraction:g} % of the channel at the top bias)")
    return lines


# --------------------------------------------------------------------------- the sweep

def sweep_bias(deck: Deck | str | os.PathLike, biases: ArrayLike, *,
               progress: Callable[[int, float, Result], None] | None = None,
               threshold_cm2: float = DEFAULT_THRESHOLD_CM2, fraction: float = PARALLEL_FRACTION,
               keep_results: bool = False, continuation: bool = True) -> BiasSweep:
    """Solve ``deck`` at every gate bias, each point starting from its neighbours' potential.

    Parameters
    ----------
    deck : Deck, str or path-like
        A deck with a Schottky surface contact (the gate); the bias replaces ``surface.bias``.
    biases : array_like
        Gate biases in V, in sweep order; finite and without repeats.
    progress : callable, optional
        ``progress(index, bias, result)`` after each point.
    threshold_cm2 : float, optional
        Channel density (cm^-2) that defines the threshold voltage.
    fraction : float, optional
        Doping-layer share of the channel density at which parallel conduction starts.
    keep_results : bool, optional
        Keep every point's :class:`~selfcon.output.result.Result` in ``sweep.results``.
    continuation : bool, optional
        Start each point from the extrapolated potential of the previous ones (default);
        False solves every point cold.

    Returns
    -------
    BiasSweep
        Per-bias arrays (densities per layer, gate charge, C = dQ/dV, subbands, band
        edges) and ``analysis`` (charge-control slope, threshold, parallel-conduction
        onset); ``save(path)`` writes the sweep file, ``plot(path)`` the figure.

    Raises
    ------
    SweepError
        No Schottky gate, or bad bias points or options (exit 2 in the command line).

    Examples
    --------
    >>> import selfcon
    >>> from selfcon.design import sweep_bias
    >>> sweep = sweep_bias(selfcon.load_deck("inputs/design/gated_delta_10K.toml"), [-0.8, -0.7, -0.6])
    >>> bool(sweep.all_converged)
    True
    >>> bool(sweep.channel_density[0] < sweep.channel_density[1] < sweep.channel_density[2])
    True
    """
    from selfcon.input.deck import Deck, load_deck
    from selfcon.api import extrapolate_potential, solve_warm
    from selfcon.model.structure import build_structure
    if not isinstance(deck, Deck):
        deck = load_deck(deck)
    _schottky_check(deck)
    biases = np.asarray(biases, dtype=float).ravel()
    if biases.size == 0:
        raise SweepError("no bias points", key="biases")
    if not np.all(np.isfinite(biases)):
        raise SweepError("bias points must be finite", key="biases")
    if np.unique(biases).size != biases.size:
        raise SweepError("bias points repeat", key="biases")
    if not (threshold_cm2 > 0 and math.isfinite(threshold_cm2)):
        raise SweepError(f"must be a positive sheet density in cm^-2, got {threshold_cm2!r}", key="--threshold")
    if not (0 < fraction < 1):
        raise SweepError(f"must lie between 0 and 1, got {fraction!r}", key="--fraction")
    structure = build_structure(deck)
    results, warm = [], []
    previous = []                  # converged (z, phi, bias) of the last points, nearest first
    for k, vb in enumerate(biases):
        dk = deck.with_overrides({"surface.bias": float(vb)})
        st = build_structure(dk)
        guess = extrapolate_potential(previous, float(vb)) if continuation else None
        r, used_warm = solve_warm(dk, guess, structure=st)
        warm.append(used_warm)
        if r.converged:
            previous = [(r.z, r.profile["potential"], float(vb))] + previous[:1]
        results.append(r)
        if progress is not None:
            progress(k, float(vb), r)
    sw = _collect(deck, structure, biases, results, np.array(warm), threshold_cm2, fraction)
    if keep_results:
        sw.results = results
    return sw


def _collect(deck, structure, biases, results, warm, threshold_cm2, fraction) -> BiasSweep:
    m = len(results)
    names = [row["name"] for row in results[0].layers]
    L = len(names)
    e = np.array([[row["electron_sheet_density_cm2"] for row in r.layers] for r in results]).reshape(m, L)
    h = np.array([[row["hole_sheet_density_cm2"] for row in r.layers] for r in results]).reshape(m, L)
    dn = np.array([[row.get("ionized_donor_sheet_density_cm2", np.nan) for row in r.layers]
                   for r in results]).reshape(m, L)
    # the channel: the main channel at the point of largest total (selfcon.output.channels),
    # followed over the sweep by depth; results without channels: the layer with most electrons
    top = int(np.argmax([r.summary["electron_sheet_density_cm2"] for r in results]))
    ref = results[top].main_channel if results[top].channels else None
    ch = int(np.argmax(e[top]))
    if ref is not None and ref.get("layer") in names:
        ch = names.index(ref["layer"])
    ns = e[:, ch].copy() if ref is None else np.array([followed_density(r, ref) for r in results])
    dop = _doping_layer_indices(structure, ch)
    nd_total = np.array([Li.donors * (Li.bottom - Li.top) / NM_PER_CM + Li.sheet_donors for Li in structure.layers])
    bound = np.clip(nd_total[None, :] - np.nan_to_num(dn), 0.0, None)      # electrons on neutral donors
    q_gate = -np.array([semiconductor_charge(r) for r in results])
    if m >= 2:
        cap = np.gradient(q_gate, biases)
    else:
        cap = np.full(1, np.nan)
    sub_e, sub_o = {}, {}
    for band in ("electron", "heavy_hole", "light_hole"):
        if not any(band in r.subbands for r in results):
            continue
        K = min(MAX_STATES, max(r.subbands[band].energy.size for r in results if band in r.subbands))
        E = np.full((m, K), np.nan)
        O = np.full((m, K), np.nan)
        for i, r in enumerate(results):
            sb = r.subbands.get(band)
            if sb is None:
                continue
            k = min(K, sb.energy.size)
            E[i, :k] = sb.energy[:k]
            O[i, :k] = sb.occupation[:k]
        sub_e[band], sub_o[band] = E, O
    z = results[0].z
    same_mesh = all(r.z.shape == z.shape for r in results)
    pot = np.array([r.profile["potential"] for r in results]) if same_mesh else np.zeros((m, 0))
    cb = np.array([r.profile["conduction_band"] for r in results]) if same_mesh else np.zeros((m, 0))
    sw = BiasSweep(
        title=deck.title, deck_text=deck.to_toml(), temperature=float(deck.temperature), bias=biases.copy(),
        layer_names=names, layer_electrons=e, layer_holes=h, layer_donors=dn,
        total_electrons=np.array([r.summary["electron_sheet_density_cm2"] for r in results]),
        total_holes=np.array([r.summary["hole_sheet_density_cm2"] for r in results]),
        channel_layer=names[ch], channel_density=ns, doping_layers=[names[i] for i in dop],
        doping_free_electrons=e[:, dop].sum(axis=1) if dop else np.zeros(m),
        doping_electrons=(e[:, dop] + bound[:, dop]).sum(axis=1) if dop else np.zeros(m), gate_charge=q_gate, capacitance=cap,
        subband_energy=sub_e, subband_occupation=sub_o,
        converged=np.array([bool(r.converged) for r in results]),
        iterations=np.array([int(r.iterations) for r in results]), warm_start=warm.astype(bool),
        z=z.copy(), potential=pot, conduction_band=cb, warnings=[list(r.warnings) for r in results],
        threshold_cm2=float(threshold_cm2), fraction=float(fraction),
        channel=str(ref["name"]) if ref is not None else names[ch])
    sw.analysis = analyse(sw, structure)
    return sw


def followed_density(result, ref: dict) -> float:
    """Sheet density (cm^-2) at one sweep point of the channel ``ref`` (a /channels row of
    another point): the channel of the same carrier overlapping ref's depth interval most,
    else that carrier's density integrated over ref's interval (a channel emptied below the
    detection floor still has a density, down to pinch-off)."""
    best, overlap = None, 0.0
    for row in result.channels:
        if row["carrier"] != ref["carrier"]:
            continue
        o = min(row["bottom_nm"], ref["bottom_nm"]) - max(row["top_nm"], ref["top_nm"])
        if o > overlap:
            best, overlap = row, o
    if best is not None:
        return float(best["sheet_density"])
    z = np.asarray(result.z)
    dens = np.asarray(result.profile["electron_density" if ref["carrier"] == "electron" else "hole_density"])
    w = half_widths(z)[3]                   # the one dual-cell rule (selfcon/model/mesh.py)
    inside = (z >= ref["top_nm"] - 1e-9) & (z <= ref["bottom_nm"] + 1e-9)
    return float(np.dot(w[inside], dens[inside])) / NM_PER_CM


# --------------------------------------------------------------------------- file

def save_sweep(sw: BiasSweep, path, *, force: bool = True) -> None:
    """Write the sweep as one HDF5 file, atomically (temp file, fsync, os.replace).

    Its layout (every variable's units, long_name, description and dimensions) is declared
    in ``selfcon.output.schema.SWEEP``; each group has its own ``bias`` coordinate (and
    ``z``, ``layer``, ``state`` where used), so ``selfcon.open_sweep`` and netCDF readers
    see a dataset on the bias dimension."""
    import h5py
    from selfcon.version import __version__
    from selfcon.output.netcdf import Group, set_attrs
    from selfcon.output.result import atomic_write, utc_now

    def fill(tmp):
        with h5py.File(tmp, "w") as f:
            set_attrs(f, [("schema", SWEEP.schema), ("schema_version", SWEEP.version),
                          ("selfcon_version", __version__),
                          ("created", utc_now()),
                          ("title", sw.title), ("temperature_K", sw.temperature), ("deck", sw.deck_text),
                          ("channel_layer", sw.channel_layer), ("channel", sw.channel),
                          ("doping_layers", list(sw.doping_layers) or [""]),
                          ("all_converged", sw.all_converged)])
            root = Group(f, "", SWEEP)
            root.coord("bias", sw.bias)
            root.var("converged", sw.converged.astype(np.int8))
            root.var("iterations", sw.iterations)
            root.var("warm_start", sw.warm_start.astype(np.int8))
            g = Group.create(f, "sheet_density", SWEEP)
            g.coord("bias", sw.bias)
            g.var("electrons_total", sw.total_electrons)
            g.var("holes_total", sw.total_holes)
            g.var("channel", sw.channel_density, note=f"{sw.channel!r} in layer {sw.channel_layer!r}")
            g.var("doping_layers", sw.doping_electrons, note=", ".join(map(repr, sw.doping_layers)) or "none")
            g.var("doping_layers_free", sw.doping_free_electrons)
            g = Group.create(f, "layers", SWEEP)
            g.coord("bias", sw.bias)
            g.coord("layer", sw.layer_names)
            g.var("name", sw.layer_names)
            g.var("electrons", sw.layer_electrons)
            g.var("holes", sw.layer_holes)
            g.var("ionized_donors", sw.layer_donors)
            top = Group.create(f, "subbands", SWEEP)
            for band in sw.subband_energy:
                g = top.subgroup(band)
                g.coord("bias", sw.bias)
                g.var("energy", sw.subband_energy[band])
                g.var("occupation", sw.subband_occupation[band])
            root.var("gate_charge", sw.gate_charge)
            root.var("capacitance", sw.capacitance)
            g = Group.create(f, "mesh", SWEEP)
            g.coord("z", sw.z)
            if sw.potential.size:
                g = Group.create(f, "profile", SWEEP)
                g.coord("bias", sw.bias)
                g.coord("z", sw.z)
                g.var("potential", sw.potential)
                g.var("conduction_band", sw.conduction_band)
            a = sw.analysis
            g = Group.create(f, "analysis", SWEEP)
            g.var("threshold_extrapolated", a["threshold_extrapolated_V"],
                  note=f"windows of {LINEAR_POINTS} consecutive points deviating <= {100 * LINEARITY:g} % of the "
                       f"rise from their line")
            g.var("linear_window", np.array(a["linear_window_V"], float))
            g.var("linear_slope", a["linear_slope_cm2_per_V"])
            g.var("threshold_crossing", a["threshold_crossing_V"])
            g.var("threshold_cm2", sw.threshold_cm2)
            g.var("parallel_onset", a["parallel_onset_V"],
                  note=f"counted above {FLOOR_CM2:g} cm-2; {a['parallel_onset_kind']}")
            g.var("parallel_fraction", sw.fraction)
            g.var("gate_channel_distance", a["gate_channel_distance_nm"])
            g.var("delta_d", a["delta_d_nm"])
            g.var("linear_capacitance", a["linear_capacitance_F_cm2"])
            f.flush()

    atomic_write(path, fill, force=force, error=SweepError)


#: colours of the sweep figure: one per layer in order, then the marks
SWEEP_COLOURS = ("#2f6fb8", "#c4572a", "#3f7f3a", "#6b4a9b", "#b88a10", "#17365d", "#8a3b12", "#4f7fb0")
SWEEP_MARKS = {"doping": "#222222", "threshold": "#7a7a7a", "vt": "#444444", "onset": "#a8322d",
               "capacitance": "#17365d"}


def sweep_figure(sw: BiasSweep):
    """The sweep as a matplotlib Figure (no pyplot): sheet density per layer versus bias (log
    scale) and C-V, every line in a legend, the run's heading on top."""
    from matplotlib.figure import Figure
    order = np.argsort(sw.bias)
    v = sw.bias[order]
    fig = Figure(figsize=(10, 4.6), dpi=120, layout="constrained")
    ax1, ax2 = fig.subplots(1, 2)
    for j, name in enumerate(sw.layer_names):
        y = sw.layer_electrons[order, j]
        if np.nanmax(y) > FLOOR_CM2:
            ax1.semilogy(v, np.maximum(y, 1e6), marker="o", ms=3, color=SWEEP_COLOURS[j % len(SWEEP_COLOURS)],
                         label=f"electrons in '{name}'")
    if sw.doping_layers and np.nanmax(sw.doping_electrons) > FLOOR_CM2:
        ax1.semilogy(v, np.maximum(sw.doping_electrons[order], 1e6), color=SWEEP_MARKS["doping"], ls="--", lw=1,
                     label="doping layers (free + on donors)")
    ax1.axhline(sw.threshold_cm2, color=SWEEP_MARKS["threshold"], lw=0.8, ls=":",
                label=f"threshold n$_s$ = {fmt(sw.threshold_cm2, 'sheet')} cm$^{{-2}}$")
    vt = sw.analysis.get("threshold_extrapolated_V", float("nan"))
    if math.isfinite(vt):
        ax1.axvline(vt, color=SWEEP_MARKS["vt"], lw=0.8, ls="--", label=f"V$_T$ (linear extrapolation) "
                                                                          f"{fmt(vt, 'V', sign=True)} V")
    po = sw.analysis.get("parallel_onset_V", float("nan"))
    if math.isfinite(po):
        ax1.axvline(po, color=SWEEP_MARKS["onset"], lw=0.8, ls="-.",
                    label=f"parallel-conduction onset {fmt(po, 'V', sign=True)} V")
    ax1.set_xlabel("gate bias (V)")
    ax1.set_ylabel("sheet density (cm$^{-2}$)")
    ax1.set_ylim(bottom=1e8)
    ax1.set_title("carriers per layer", fontsize=10)
    ax2.plot(v, sw.capacitance[order] * 1e9, marker="s", ms=3, color=SWEEP_MARKS["capacitance"],
             label="C = dQ/dV (gate charge)")
    ax2.set_xlabel("gate bias (V)")
    ax2.set_ylabel("capacitance (nF/cm$^2$)")
    ax2.set_title("C–V", fontsize=10)
    handles = ax1.get_legend_handles_labels()[0] + ax2.get_legend_handles_labels()[0]
    fig.legend(handles=handles, loc="outside lower center", ncol=3, fontsize=8, frameon=False)
    fig.suptitle(f"{sw.title}\nT = {fmt(sw.temperature, 'K')} K, gate bias {fmt(float(v[0]), 'V', sign=True)} "
                 f"to {fmt(float(v[-1]), 'V', sign=True)} V", fontsize=10)
    return fig


def plot_sweep(sw: BiasSweep, path, *, force: bool = True) -> None:
    """Write :func:`sweep_figure` to ``path`` (.png, .svg or .pdf), atomically."""
    from selfcon.output.files import save_figure
    save_figure(sweep_figure(sw), path, force=force, error=SweepError, dpi=120)


def load_sweep_file(path) -> dict:
    """A sweep file as a flat dict of arrays (for scripts and tests)."""
    import h5py
    out = {}
    with h5py.File(path, "r") as f:
        if f.attrs.get("schema") != SCHEMA:
            raise SweepError("not a selfcon bias-sweep file", file=str(path))
        out["attrs"] = dict(f.attrs)

        def visit(name, obj):
            if isinstance(obj, h5py.Dataset):
                out[name] = obj[()]
        f.visititems(visit)
    return out
