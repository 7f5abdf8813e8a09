"""Design warnings: plain-English notes on a solved structure that a grower would want to see.

:func:`design_warnings` is called by ``selfcon.output.assemble.build_result`` on every solve;
its lines end up in ``Result.warnings``, the ``run``/``show`` output, the JSON and the
``/summary`` attribute ``warnings`` of the result file.  Each check is a plain function
``check(result, structure, deck=None) -> list[str]`` (one line per finding, with the
numbers), registered in :data:`CHECKS` with :func:`register_check`, so it can be tested
on its own.  ``deck`` is the Deck solved (selfcon.input.deck.Deck); a check that needs a
deck value reads it with ``deck.get(path)`` or ``deck.material(name)``, and gets the
Deck of ``result.deck_text`` when called without one (:func:`deck_of`).

Thresholds (our own choices, stated here and in README.md, "Design recipes"):

* second subband: the second subband of the main channel (selfcon.output.channels) is
  occupied by the one rule of the README: at least ``SECOND_SUBBAND_FRACTION`` = 1 % of
  the channel's sheet density and at least 1e8 cm^-2.
* parasitic channel: an auto-detected channel other than the main one (electrons or
  holes, in a doping layer or anywhere else) holds more than ``PARALLEL_FRACTION`` = 1 %
  of the main channel's sheet density, and at least ``FLOOR_CM2`` = 1e8 cm^-2.  A
  channel's own subband tail belongs to that channel, so a 2DEG reaching into a doped
  layer next to it (no spacer) is no alarm; channels named in ``[[channel]]`` tables are
  intended and never parasitic.
* carriers outside the quantum regions: electrons or holes at the nodes outside every
  quantum region (counted classically, without subbands) exceed ``OUTSIDE_FRACTION`` =
  1 % of the main channel's sheet density and 1e8 cm^-2 (not for a deck with no quantum
  region at all: fully classical by choice).
* DX-centre regime: a donor-doped AlGaAs layer with Al fraction above ``DX_MIN_X`` = 0.2
  (Si donors form DX centres there; common practice) where the Fermi level lies less
  than ``max(DX_WINDOW_KT * kT, DX_WINDOW_EV)`` = max(3 kT, 50 meV) below the donor
  level Ec - E_bind, or above it.  50 meV applies below about 190 K, 3 kT above.  A layer
  whose donors are modelled as Si-DX (``layer.donor_species``) gets instead one line naming
  the model, the state at the run temperature (equilibrium, dark cool-down or illuminated;
  below ``DX_FREEZE_HINT_K`` = 150 K a real wafer is not in equilibrium) and the ionised share.
* quantum region cut: at a region end that is not a contact, the electron (or hole)
  density within ``CUT_DISTANCE_NM`` = 2 nm of the end node, on either side, exceeds
  ``CUT_FRACTION`` = 1e-3 of that carrier's peak density.
* buffer carriers: electrons plus holes in the last ``BUFFER_DEPTH_NM`` = 100 nm above the
  bottom contact, other than those of the main channel's own subbands, exceed 1 % of the
  channel sheet density (and 1e8 cm^-2), unless the bottom layer is the channel itself.
* not converged: the self-consistent loop did not converge (its message is repeated).
* critical thickness: a strained layer with |eps_xx| >= ``CRITICAL_MIN_STRAIN`` = 0.1 % is
  thicker than its Matthews-Blakeslee critical thickness (selfcon.model.strain: a buried
  layer has two misfit segments, the top layer one), or a run of strained layers is thicker
  than the critical thickness of its thickness-weighted mean strain (the average-strain
  approximation; runs start and end at layers above the 0.1 % floor; the worst run is
  named).  Below 0.1 % misfit (AlGaAs on GaAs) Matthews-Blakeslee's equilibrium thickness
  is microns and growth kinetics keep such layers coherent: no warning, but `check` lists
  the numbers.
* type-II / broken-gap interface: two neighbouring layers inside a quantum region whose
  Gamma and top valence edges are staggered (type II: electrons on one side, holes on the
  other) or broken (one layer's conduction edge below the other's valence edge, InAs/GaSb),
  and the layers next to it hold more than ``FLOOR_CM2`` carriers.  The single-band model
  treats electrons and holes as independent bands: it leaves out the coupling of the
  electron states of one layer to the valence states of the other across the interface
  (their energy distance, the interface gap, is smaller than either bulk gap; at a broken
  gap the electron and hole subbands anticross and open a hybridisation gap), and the
  conduction-band non-parabolicity that a small gap brings.  Subband energies, masses and
  the charge transferred across a broken gap are therefore only rough.

* critical thickness of wurtzite layers: the same warning names the channel-cracking
  criterion (selfcon.model.strain: tensile nitride layers crack rather than form misfit
  dislocations; h_c = K_Ic^2/(Z sigma^2), Hutchinson and Suo 1992), per layer and for runs
  of tensile layers (their elastic energies summed).
* polarization-fed parasitic channel: a parasitic electron channel within
  ``POLARIZATION_DISTANCE_NM`` = 5 nm of a positive polarization sheet of at least
  ``POLARIZATION_MIN_CM2`` = 1e10 cm^-2 (``Result.interfaces``) is named with that
  interface (a back barrier grown on GaN); hole channels at a negative sheet are left to
  the next check.
* holes at a negative polarization sheet (``polarization_holes``): holes within
  ``HOLE_WINDOW_NM`` = 5 nm of a sheet below -1e10 cm^-2 exceed 1 % of the main channel
  and 1e8 cm^-2 and are not the main or a named channel (a GaN cap on AlGaN, the bottom of
  an N-face barrier); in a deck that counts no holes, the valence edge there within
  ``VALLEY_KT`` = 10 kT of EF.
* beyond Gamma (``beyond_gamma``): with physics.exchange_correlation or
  physics.nonparabolicity on, X/Delta or L valley subbands (physics.quantum_valleys) hold at
  least ``BEYOND_GAMMA_FRACTION`` = 1 % of the electrons in subbands and ``FLOOR_CM2``:
  both corrections act on Gamma electrons (V_xc also on holes) only, so those subbands are
  solved in the Hartree, parabolic model.
* valley splitting (``valley_splitting``): with physics.quantum_valleys, occupied subbands
  of the X/Delta valleys along z (``x2_electron``) whose valley degeneracy is 2 (Si and Ge;
  a zincblende crystal has one such X valley) hold at least ``VALLEY_SPLIT_FRACTION`` = 1 %
  of the electrons in subbands and ``FLOOR_CM2``: the model counts the two valleys as
  degenerate, while interfaces split them (by tenths of a meV or less in Si/SiGe, from
  memory), depending on the interface sharpness and steps, the vertical field and the
  alloy disorder.
* strained-offset model (``strained_offset``): a layer of the library alloy InGaAs (or a
  deck material based on it that does not set ``valence_band_offset``) under compressive
  strain of at least ``CRITICAL_MIN_STRAIN`` (pseudomorphic on GaAs, the pHEMT channel) takes
  its valence offset from the 2001 review's InGaAs bowing (-0.38 eV), which is fitted to
  InP-matched layers.  Strained In_xGa_(1-x)As/GaAs wells measure a deeper conduction offset
  (Qc = 0.65-0.70, Huang et al., Appl. Phys. Lett. 55, 2026 (1989); dEc = 0.814 x - 0.21 x^2
  eV from C-V profiling, Zubkov et al., arXiv cond-mat/0307107 (2003)), which the review's
  binary offsets interpolated linearly reproduce (tests/test_strain.py).  The line names the
  shift x(1-x)*0.38 eV and the linear valence offset to set in a ``[material.NAME]``.
* type-II interfaces with an interface gap of at least ``TYPE_II_GAP_EV`` = 1 eV are not
  flagged (wide-gap nitride pairs staggered by strain).
* multiband holes curving the wrong way (``kp_hole_bands``): with physics.hole_model kp4 /
  kp6, a layer inside a quantum region whose holes were solved has Luttinger parameters that
  give a bulk hole band with an inverse mass <= 0 (a negative or infinite mass) along a
  direction the model uses (selfcon.solver.kp.bulk_curvatures): the loop's axial model
  (every polar angle from [001]), the warped [100] line (the (010) plane: [001], [101]) and the
  [110] line (the (1-10) plane: [001], [111], [110]); the Gamma8 masses at the zone centre
  (g1 -+ 2 g2 [001], g1 -+ sqrt(g2^2 + 3 g3^2) <110>, g1 -+ 2 g3 [111]) and, with kp6, the
  curvatures far beyond the split-off gap (g1 + g2 - 3 g3 along <110>).  GaP of the 2001
  review (g1 - 2 g3 = -1.81) and InGaP up to x ~ 0.67 trip it; no threshold but the sign (the
  band turns over).  The line names the layers, their composition and parameters, each closed
  form with its value and direction, and what is unreliable: the loop's states (charge,
  subbands, masses) and both lines, or, where the axial model is unaffected, the warped line
  alone.  `selfcon check` lists the same for every quantum region before the solve.

How to add a design warning
---------------------------
1. Write ``check_<name>(result, structure, deck=None) -> list[str]`` in this module (or
   in any module imported before the solve): ``result`` is the assembled Result (output
   units: cm^-2, cm^-3, eV), ``structure`` the Structure (internal units, per-cell arrays,
   ``structure.mesh.w`` the node weights), ``deck`` the Deck.  Return one line per
   finding that names the layer and the numbers and says what to change; return ``[]``
   when all is well.  A check must not raise on a sound result: if it does,
   :func:`design_warnings` reports "design check NAME could not run" instead.
2. Put its threshold in a module constant and state it, with its source ("common
   practice", a paper, ...), in the list above and in README.md ("Design recipes").
3. Decorate it with ``@register_check("<name>")``; warnings are listed in registration
   order (``before="<other>"`` puts it earlier).  ``unregister_check("<name>")`` removes it.
4. Test it in tests/test_diagnostics.py with a deck built to trigger it, and check that
   the clean demo design stays silent; the line reaches ``Result.warnings``, the
   ``warnings`` attribute of ``/summary`` in the result file and ``selfcon show``.
   tests/test_recipes.py follows these steps for a throwaway check.
"""
from __future__ import annotations

from typing import Callable

import numpy as np

from selfcon.constants import KB_EV, NM_PER_CM
from selfcon.input.materials import ALLOYS, BINARIES
from selfcon.input.materials.alloys import bowing_value
from selfcon.model.mesh import Mesh
from selfcon.model.structure import derived
from selfcon.output.channels import BAND_CARRIER, STATE_LABEL, dopant_carriers
from selfcon.output.numbers import fmt

SECOND_SUBBAND_FRACTION = 0.01      # the occupied rule of selfcon.output.channels
PARALLEL_FRACTION = 0.01
FLOOR_CM2 = 1e8
OUTSIDE_FRACTION = 0.01
DX_MIN_X = 0.2
DX_WINDOW_KT = 3.0
DX_WINDOW_EV = 0.050
CUT_FRACTION = 1e-3
CUT_DISTANCE_NM = 2.0
BUFFER_DEPTH_NM = 100.0
BUFFER_FRACTION = 0.01

__all__ = ["design_warnings", "register_check", "unregister_check", "deck_of",
           "check_not_converged", "check_second_subband", "check_parasitic_channels",
           "check_parallel_conduction", "check_carriers_outside", "channel_subbands",
           "check_dx_centres", "dx_model_note", "check_region_cut", "check_buffer_carriers",
           "check_uncounted_valleys", "doping_layers", "doping_layer_electrons",
           "CHECKS", "check_critical_thickness", "check_band_alignment",
           "interface_alignments", "check_polarization_holes", "polarization_sheet_near",
           "check_kp_hole_bands", "kp_curvature_findings", "kp_curvature_text"]

#: name -> check, in the order warnings are listed (filled by register_check)
CHECKS: dict[str, Callable] = {}


def register_check(name: str, *, before: str | None = None):
    """Decorator: list ``check(result, structure, deck=None) -> list[str]`` among the
    design warnings under ``name``, after the checks registered so far (or just before
    the check ``before``).  Registering a taken name is an error."""
    def add(check):
        if name in CHECKS:
            raise ValueError(f"a design check named {name!r} is already registered")
        if before is not None and before not in CHECKS:
            raise ValueError(f"no design check named {before!r} (registered: {', '.join(CHECKS)})")
        items = list(CHECKS.items())
        at = len(items) if before is None else [k for k, _ in items].index(before)
        items.insert(at, (name, check))
        CHECKS.clear()
        CHECKS.update(items)
        return check
    return add


def unregister_check(name: str) -> None:
    """Remove the design check ``name`` (KeyError if there is none)."""
    del CHECKS[name]


def deck_of(result, deck=None):
    """``deck`` if given, else the Deck of ``result.deck_text`` (the effective deck every
    result stores; a result read back from its file has no other)."""
    if deck is not None:
        return deck
    from selfcon.input.deck import load_deck
    return load_deck(result.deck_text)


# --------------------------------------------------------------------------- helpers

def _layer_rows(result) -> list[dict]:
    return list(result.layers or [])


def channel_index(result) -> int | None:
    name = (result.summary or {}).get("channel_layer")
    rows = _layer_rows(result)
    for i, row in enumerate(rows):
        if row.get("name") == name:
            return i
    if not rows:
        return None
    return int(np.argmax([r.get("electron_sheet_density_cm2", 0.0) for r in rows]))


def channel_density(result) -> float:
    s = result.summary or {}
    v = s.get("channel_electron_sheet_density_cm2")
    if v is None:
        i = channel_index(result)
        v = _layer_rows(result)[i]["electron_sheet_density_cm2"] if i is not None else 0.0
    return float(v)


def doping_layers(result, structure) -> list[int]:
    """Indices of layers with bulk or sheet donors, the channel excluded."""
    ch = channel_index(result)
    return [Li.index for Li in structure.layers
            if (Li.donors > 0 or Li.sheet_donors > 0) and Li.index != ch]


def _donors_per_layer(structure) -> list[float]:
    """Donors per area (cm^-2) of every layer: bulk density times thickness plus the sheet."""
    return [Li.donors * (Li.bottom - Li.top) / NM_PER_CM + Li.sheet_donors for Li in structure.layers]


def doping_layer_electrons(result, structure, *, bound: bool = False) -> float:
    """Electrons per area (cm^-2) in all doping layers (the channel excluded).

    ``bound=False``: free (conduction-band) electrons only, the ones that conduct in
    parallel.  ``bound=True``: plus the electrons sitting on neutral donors (Nd - Nd+),
    i.e. all the charge the doping layer has taken back from the channel.
    """
    rows = _layer_rows(result)
    idx = doping_layers(result, structure)
    total = sum(float(rows[i]["electron_sheet_density_cm2"]) for i in idx)
    if bound:
        nd = _donors_per_layer(structure)
        for i in idx:
            ion = rows[i].get("ionized_donor_sheet_density_cm2", nd[i])
            total += max(nd[i] - float(ion), 0.0)
    return float(total)


def _fmt_cm2(x: float) -> str:
    return f"{fmt(x, 'sheet')} cm^-2"


# --------------------------------------------------------------------------- the checks

@register_check("not_converged")
def check_not_converged(result, structure=None, deck=None) -> list[str]:
    """The loop did not converge: repeat its message (it says what to try)."""
    if result.converged:
        return []
    text = result.message if result.message.startswith("not converged") else f"not converged: {result.message}"
    return [f"{text}; the profiles and subbands of this result are the loop's last iterate, "
            "not a solution"]


def channel_subbands(result, structure=None, channel: int | None = None) -> list[tuple[str, int]]:
    """(band, index) of the states of a channel (default: the main one), lowest kinetic
    energy first (electron states upwards, hole states downwards)."""
    rows = list(result.channels or [])
    if channel is None:
        channel = next((j for j, c in enumerate(rows) if c.get("main")), -1)
    if not 0 <= channel < len(rows):
        return []
    sign = 1.0 if rows[channel]["carrier"] == "electron" else -1.0
    own = []
    for band, sb in (result.subbands or {}).items():
        ks = (np.asarray(sb.channel) == channel).nonzero()[0]
        if ks.size:
            own += zip((sign * np.asarray(sb.energy, dtype=float)[ks]).tolist(), [band] * ks.size, ks.tolist())
    return [(band, k) for _, band, k in sorted(own)]


_LABEL = STATE_LABEL


@register_check("second_subband")
def check_second_subband(result, structure, deck=None) -> list[str]:
    """The main channel's second subband is occupied (>= 1 % of the channel, >= 1e8 cm^-2)."""
    main = result.main_channel if result.channels else None
    states = channel_subbands(result, structure)
    if main is None or len(states) < 2:
        return []
    from selfcon.output.channels import occupied
    (b0, k0), (b1, k1) = states[:2]
    n1 = float(result.subbands[b1].occupation[k1])
    ns = float(main["sheet_density"])
    if not occupied(n1, ns) or ns <= 0:
        return []
    holes = main["carrier"] == "hole"
    ef = float((result.summary or {}).get("hole_fermi_level_eV" if holes else "electron_fermi_level_eV", 0.0))
    e0 = float(result.subbands[b0].energy[k0]) - ef          # relative to the carrier's own level
    e1 = float(result.subbands[b1].energy[k1]) - ef
    kind = "hole" if holes else "electron"
    where = ("above" if e1 > 0 else "below") if holes else ("below" if e1 < 0 else "above")
    label = f" ({_LABEL[b1]}{k1})" if holes else ""
    return [f"second {kind} subband occupied in the main channel {main['name']!r}{label}: E1 - EF = "
            f"{1e3 * e1:+.1f} meV ({where} EF), n1 = {_fmt_cm2(n1)} = {100 * n1 / ns:.1f} % of the "
            f"channel (E1 - E0 = {1e3 * abs(e1 - e0):.1f} meV); mobility drops from intersubband scattering"]


def _relative(n: float, main: dict, limit: float) -> str:
    """'12.3 % of the main channel 'x' (4.1e+11 cm^-2; limit 1 %)', or, when the main channel
    is empty, 'while the main channel 'x' holds none'."""
    ns = float(main["sheet_density"])
    if ns > 0:
        return (f"{100 * n / ns:.1f} % of the main channel {main['name']!r} ({_fmt_cm2(ns)}; "
                f"limit {100 * limit:g} %)")
    return f"while the main channel {main['name']!r} holds none"


def _doped_layer_in(structure, top: float, bottom: float, carrier: str) -> str | None:
    """Name of a layer overlapping [top, bottom] nm doped with the dopant that supplies
    ``carrier`` (donors for electrons, acceptors for holes; bulk or sheet), or None."""
    for Li in structure.layers:
        if carrier in dopant_carriers(Li) and Li.top < bottom and top < Li.bottom:
            return Li.name
    return None


@register_check("parasitic_channel")
def check_parasitic_channels(result, structure, deck=None) -> list[str]:
    """An auto-detected channel other than the main one holds > 1 % of the main channel's carriers."""
    main = result.main_channel if result.channels else None
    if main is None:
        return []
    ns = float(main["sheet_density"])
    limit = max(PARALLEL_FRACTION * ns, FLOOR_CM2)
    out = []
    for c in result.channels:
        if c.get("main") or c.get("named"):
            continue
        n = float(c["sheet_density"])
        if n <= limit:
            continue
        kind = "electrons" if c["carrier"] == "electron" else "holes"
        doped = (_doped_layer_in(structure, c["top_nm"], c["bottom_nm"], c["carrier"])
                 if structure is not None else None)
        sheet = polarization_sheet_near(result, c["top_nm"], c["bottom_nm"], c["carrier"])
        if sheet is not None and c["carrier"] == "hole":
            continue            # holes at a negative polarization sheet: check_polarization_holes
        if doped is not None:
            advice = f"parallel conduction through the doped layer {doped!r}: lower the doping or thin the spacer"
        elif sheet is not None:
            advice = (f"fed by the polarization sheet {sheet['sigma_cm2']:+.3g} cm^-2 at the {sheet['upper']!r}/"
                      f"{sheet['lower']!r} interface (z = {sheet['depth_nm']:g} nm): grade that interface or "
                      "lower its composition step (a back barrier: grow the buffer itself as relaxed AlGaN, or "
                      "grade the back barrier's bottom)")
        else:
            advice = (f"a second conducting sheet in {c['layer']!r}: thicken the barrier between it and the doping "
                      "that feeds it, or lower that doping")
        out.append(f"parasitic channel {c['name']!r}: {_fmt_cm2(n)} {kind} at {c['top_nm']:.0f}-"
                   f"{c['bottom_nm']:.0f} nm (centroid {c['centroid_nm']:.0f} nm), "
                   f"{_relative(n, main, PARALLEL_FRACTION)}; {advice}")
    return out


#: nm: a channel within this distance of a polarization sheet is fed by it
POLARIZATION_DISTANCE_NM = 5.0
#: cm^-2: polarization sheets smaller than this feed no channel worth naming
POLARIZATION_MIN_CM2 = 1e10


def polarization_sheet_near(result, top: float, bottom: float, carrier: str) -> dict | None:
    """The strongest polarization sheet (a row of ``result.interfaces`` as a dict) of the sign
    that attracts ``carrier`` (positive for electrons, negative for holes) at most
    POLARIZATION_DISTANCE_NM outside the interval [top, bottom] nm; None without one."""
    t = result.interfaces or {}
    depth = np.asarray(t.get("depth_nm", []), dtype=float)
    if depth.size == 0:
        return None
    sigma = np.asarray(t["sigma_cm2"], dtype=float)
    sign = 1.0 if carrier == "electron" else -1.0
    near = ((depth >= top - POLARIZATION_DISTANCE_NM) & (depth <= bottom + POLARIZATION_DISTANCE_NM)
            & (sign * sigma > POLARIZATION_MIN_CM2))
    if not near.any():
        return None
    k = int(np.flatnonzero(near)[np.argmax(sign * sigma[near])])
    return {"depth_nm": float(depth[k]), "sigma_cm2": float(sigma[k]),
            "upper": str(t["upper"][k]), "lower": str(t["lower"][k])}


#: the earlier name of the parasitic-channel check (it covered doping layers only)
check_parallel_conduction = check_parasitic_channels


@register_check("carriers_outside")
def check_carriers_outside(result, structure, deck=None) -> list[str]:
    """Electrons or holes outside every quantum region above 1 % of the main channel."""
    main = result.main_channel if result.channels else None
    regions = list(result.regions_nm or [])
    if main is None or not regions:
        return []
    z = np.asarray(result.z)
    w = structure.mesh.w if structure is not None else Mesh.from_nodes(z).w

    def mask():
        out = np.ones(z.size, dtype=bool)
        for a, b in regions:
            out &= ~((z >= a - 1e-9) & (z <= b + 1e-9))
        out.setflags(write=False)
        return out
    # the nodes outside the quantum regions: a property of the mesh, once per structure
    outside = (derived(structure, ("outside_regions", tuple(map(tuple, regions))), mask)
               if structure is not None and np.array_equal(z, structure.z) else mask())
    ns = float(main["sheet_density"])
    limit = max(OUTSIDE_FRACTION * ns, FLOOR_CM2)
    li = np.asarray(result.layer_index)
    rows = _layer_rows(result)
    out = []
    for kind, key in (("electrons", "electron_density"), ("holes", "hole_density")):
        dens = np.asarray(result.profile[key]) * w * outside
        n = float(dens.sum()) / NM_PER_CM
        if n <= limit:
            continue
        per = np.bincount(li, weights=dens, minlength=len(rows))
        where = f", mostly in {rows[int(np.argmax(per))]['name']!r}" if rows else ""
        out.append(f"carriers outside the quantum regions: {_fmt_cm2(n)} {kind}{where}, "
                   f"{_relative(n, main, OUTSIDE_FRACTION)}; they are counted classically, without "
                   "subbands: widen quantum.regions to cover them")
    return out


def _algaas_x(result, deck, structure, layer) -> tuple[bool, np.ndarray]:
    """(is AlGaAs, alloy fraction of its cells) for one layer; a deck-local material
    counts when its base is AlGaAs."""
    x = _dx_cells(structure)[layer.index][0]
    name = layer.material
    if name == "AlGaAs":
        return True, x
    mat = deck_of(result, deck).material(name)
    if mat is not None and mat.base == "AlGaAs":
        if np.all(~np.isfinite(x)) and mat.x is not None:
            x = np.full(x.size, float(mat.x))
        return True, x
    return False, x


def _dx_cells(structure) -> dict:
    """layer index -> (alloy fraction of its cells, its cells with x > DX_MIN_X, its nodes with
    sheet donors): what the DX check reads of the structure, made once per structure
    (model.structure.derived; read-only)."""
    def make():
        cl = np.asarray(structure.cell_layer)
        xc = np.asarray(structure.x_cell)
        sheet_nodes = np.flatnonzero(np.asarray(structure.sheet_donors) > 0)
        node_layer = np.asarray(structure.layer_index)[sheet_nodes]
        out = {}
        for Li in structure.layers:
            parts = (xc[cl == Li.index], np.flatnonzero((cl == Li.index) & (xc > DX_MIN_X)),
                     sheet_nodes[node_layer == Li.index])
            for a in parts:
                a.setflags(write=False)
            out[Li.index] = parts
        return out
    return derived(structure, "dx_cells", make)


def dx_window(temperature: float) -> float:
    """Fermi-level distance (eV) to the donor level below which the DX warning is raised."""
    return max(DX_WINDOW_KT * KB_EV * temperature, DX_WINDOW_EV)


def dx_regime_text(temperature: float) -> str:
    """What Si DX centres do at ``temperature``: below ``DX_FREEZE_HINT_K`` their occupation
    freezes (a dark cool-down keeps it, light ionises it for good: persistent
    photoconductivity); above it capture and emission are fast and they hold their
    equilibrium share of electrons (Mooney, J. Appl. Phys. 67, R1, 1990)."""
    if temperature < DX_FREEZE_HINT_K:
        return (f"at {temperature:g} K (below about {DX_FREEZE_HINT_K:g} K) Si DX centres there keep the "
                "occupation of the cool-down: in the dark they hold electrons the shallow model puts in "
                "the channel, after illumination they stay ionised (persistent photoconductivity)")
    return (f"at {temperature:g} K Si DX centres there trap and release electrons fast, so in equilibrium "
            "they hold electrons the shallow model puts in the channel (no persistent photoconductivity "
            "at this temperature)")


@register_check("dx_centres")
def check_dx_centres(result, structure, deck=None) -> list[str]:
    window = dx_window(structure.temperature)
    ec = np.asarray(result.profile["conduction_band"])
    bind = np.asarray(structure.cell["donor_binding"])
    out = []
    for Li in structure.layers:
        if not (Li.donors > 0 or Li.sheet_donors > 0):
            continue
        if getattr(Li, "donor_species", "shallow") == "Si-DX":
            out.append(dx_model_note(result, structure, Li))
            continue
        is_algaas, x = _algaas_x(result, deck, structure, Li)
        if not is_algaas or x.size == 0 or not np.any(x > DX_MIN_X):
            continue
        # donor level Ed = Ec - E_bind at every doped node of the layer; EF = 0
        levels = []
        _, cells, nodes = _dx_cells(structure)[Li.index]
        if Li.donors > 0 and cells.size:
            # node c (left end of each cell) carries the cell's band edge in the profile
            levels.append(np.min(ec[cells] - bind[cells]))
        if Li.sheet_donors > 0:
            if nodes.size:
                levels.append(np.min(ec[nodes] - np.asarray(structure.sheet_ed)[nodes]))
        if not levels:
            continue
        ed = float(min(levels))          # Ed - EF (eV): > 0 means EF below the donor level
        if ed < window:
            pos = (f"{1e3 * ed:.0f} meV below the donor level" if ed >= 0 else
                   f"{-1e3 * ed:.0f} meV above the donor level")
            out.append(f"DX-centre regime: in {Li.name!r} (AlGaAs, x = {float(np.nanmax(x)):.2f} > {DX_MIN_X}) "
                       f"EF lies {pos} (window {1e3 * window:.0f} meV = max(3 kT, 50 meV)); "
                       f"{dx_regime_text(structure.temperature)}; the donors are modelled as shallow: "
                       "set layer.donor_species = \"Si-DX\" to model the DX level")
    return out


#: below about this temperature (K) DX capture and emission stop within a measurement's time
#: (Mooney, J. Appl. Phys. 67, R1 (1990): the persistent photoconductivity survives below
#: ~100-150 K; from memory)
DX_FREEZE_HINT_K = 150.0


def dx_model_note(result, structure, layer) -> str:
    """The DX line of a Si-DX layer: the model used, the state at the run temperature and the
    ionised share of the layer's donors."""
    from selfcon.model.dopants import DX_MODEL
    row = result.layers[layer.index]
    total = layer.donors * (layer.bottom - layer.top) / NM_PER_CM + layer.sheet_donors
    share = row["ionized_donor_sheet_density_cm2"] / total if total > 0 else float("nan")
    T = structure.temperature
    frozen = getattr(structure, "dx_frozen", None)
    tf = getattr(layer, "dx_freeze_temperature", None)
    if getattr(layer, "dx_state", "equilibrium") == "ionized":
        state = ("illuminated: every DX centre ionised (persistent photoconductivity; in the dark "
                 "fewer are, and n_s is lower)")
    elif frozen is not None and tf is not None and tf > T:
        state = (f"dark cool-down: the DX occupation of equilibrium at {tf:g} K (gate unbiased), kept "
                 f"at {T:g} K; illumination would ionise them (layer.dx_state = \"ionized\")")
    elif T < DX_FREEZE_HINT_K:
        state = (f"in equilibrium at {T:g} K, which a real wafer does not reach below about "
                 f"{DX_FREEZE_HINT_K:g} K: set layer.dx_freeze_temperature for a dark cool-down, or "
                 "layer.dx_state = \"ionized\" after illumination")
    else:
        state = f"in equilibrium at {T:g} K (DX capture and emission are fast at this temperature)"
    return (f"Si-DX donors in {layer.name!r}: {DX_MODEL}; {state}; {100 * share:.0f} % of the layer's "
            "donors are ionised")


@register_check("region_cut")
def check_region_cut(result, structure, deck=None) -> list[str]:
    z = np.asarray(result.z)
    n_nodes = z.size
    out = []
    if not structure.regions:
        return out
    # the nodes near each region end depend on the mesh alone: once per structure
    ends = (derived(structure, "region_cut_nodes", lambda: _region_end_nodes(z, structure.regions))
            if np.array_equal(z, structure.z) else _region_end_nodes(z, structure.regions))
    peaks = {key: float(np.asarray(result.profile[key]).max()) for key in ("electron_density", "hole_density")}
    for k, (i0, i1) in enumerate(structure.regions):
        for end, label in ((i0, "top"), (i1, "bottom")):
            if end == 0 or end == n_nodes - 1:
                continue            # a contact: nothing is cut
            near = ends[(k, end)]
            for carrier, key in (("electron", "electron_density"), ("hole", "hole_density")):
                dens = np.asarray(result.profile[key])
                peak = peaks[key]
                if peak <= 0:
                    continue
                local = float(dens[near].max())
                if local > CUT_FRACTION * peak:
                    out.append(f"quantum region {k} [{structure.regions_nm[k][0]:g}, "
                               f"{structure.regions_nm[k][1]:g}] nm cuts the {carrier}s at its {label} end "
                               f"(z = {z[end]:g} nm): {fmt(local, 'volume')} cm^-3 within {CUT_DISTANCE_NM:g} nm, "
                               f"{local / peak:.2g} of the peak {fmt(peak, 'volume')} cm^-3; widen the region")
                    break
    return out


def _region_end_nodes(z, regions) -> dict:
    """(region index, end node) -> the other nodes within CUT_DISTANCE_NM of that end (its
    two neighbours if none), for :func:`check_region_cut`."""
    out = {}
    for k, (i0, i1) in enumerate(regions):
        for end in (i0, i1):
            if end == 0 or end == z.size - 1:
                continue
            near = np.flatnonzero(np.abs(z - z[end]) <= CUT_DISTANCE_NM)
            near = near[near != end]
            if near.size == 0:
                near = np.array([end - 1, end + 1])
            near.setflags(write=False)
            out[(k, end)] = near
    return out


@register_check("buffer_carriers")
def check_buffer_carriers(result, structure, deck=None) -> list[str]:
    z = np.asarray(result.z)
    ch = channel_index(result)
    last = int(np.asarray(result.layer_index)[-1])
    if ch is not None and last == ch:
        return []
    w = structure.mesh.w
    sel = z >= z[-1] - BUFFER_DEPTH_NM
    first = int(sel.argmax())
    if sel[first:].all():
        sel = slice(first, None)        # the nodes increase: those within reach are a tail
    # the main channel's own subbands near the contact (a short stack) are no buffer carriers
    own = {"electron": None, "hole": None}
    j = next((k for k, c in enumerate(result.channels or []) if c.get("main")), -1)
    # the subbands vanish outside their quantum regions: when none reaches the last
    # BUFFER_DEPTH_NM (the usual buffer), their part there is exactly 0 without summing it
    reach = (structure is None or not np.array_equal(z, structure.z)
             or any(i1 >= first for _, i1 in structure.regions))
    if j >= 0 and reach:
        kind = result.channels[j]["carrier"]
        own[kind] = np.zeros(z.size)
        for band, sb in (result.subbands or {}).items():
            mine = np.asarray(sb.channel) == j
            if np.any(mine) and BAND_CARRIER.get(band) == kind:
                own[kind] += (np.asarray(sb.wavefunction)[:, mine] ** 2) @ np.asarray(sb.occupation)[mine] * NM_PER_CM

    def free(key, carrier):
        """The carriers of ``key`` at the selected nodes less the channel's own (none: x - 0
        is x, so the density as it is)."""
        dens = np.asarray(result.profile[key])
        return dens[sel] if own[carrier] is None else (dens - own[carrier])[sel]
    n = float((free("electron_density", "electron") * w[sel]).sum()) / NM_PER_CM
    p = float((free("hole_density", "hole") * w[sel]).sum()) / NM_PER_CM
    ns = channel_density(result)
    limit = max(BUFFER_FRACTION * ns, FLOOR_CM2)
    if n + p <= limit:
        return []
    name = _layer_rows(result)[last]["name"] if _layer_rows(result) else "bottom layer"
    return [f"carriers near the bottom contact: {_fmt_cm2(n)} electrons and {_fmt_cm2(p)} holes in the last "
            f"{BUFFER_DEPTH_NM:g} nm of {name!r} (limit {_fmt_cm2(limit)}, 1 % of the channel); "
            "a conducting buffer or too short a buffer: thicken it or check the substrate contact"]


#: an X or L edge closer than this many kT above EF (or below it) would hold electrons
VALLEY_KT = 10.0


@register_check("uncounted_valleys")
def check_uncounted_valleys(result, structure, deck=None) -> list[str]:
    """X or L valley near or below EF in some layer while the deck does not count its electrons."""
    if structure is None:
        return []
    kT = 8.617333262e-5 * float(result.temperature)
    rows = _layer_rows(result)
    li = np.asarray(result.layer_index)
    out = []
    for carrier, key, label in (("x_electron", "conduction_band_x", "X"),
                                ("l_electron", "conduction_band_l", "L")):
        if carrier in structure.carriers or key not in result.profile:
            continue
        efn = float((result.summary or {}).get("electron_fermi_level_eV", 0.0))
        edge = np.asarray(result.profile[key]) - efn          # relative to the electrons' level
        gamma = np.asarray(result.profile["conduction_band"]) - efn
        hit = np.nonzero((edge < VALLEY_KT * kT) & (edge < gamma + VALLEY_KT * kT))[0]
        if hit.size == 0:
            continue
        layers = sorted({int(li[i]) for i in hit})
        names = ", ".join(repr(rows[k]["name"]) for k in layers) if rows else "some layers"
        out.append(f"{label} valley within {VALLEY_KT:g} kT of EF (lowest {label} edge "
                   f"{1e3 * float(edge[hit].min()):+.0f} meV) in {names}, but {label}-valley electrons "
                   f"are not counted: add \"{carrier}\" to physics.carriers")
    return out


@register_check("valley_splitting")
def check_valley_splitting(result, structure=None, deck=None) -> list[str]:
    """Occupied subbands of a valley set holding two or more equivalent valleys (the Delta2
    valleys of Si and Ge) are counted as degenerate: the model has no valley splitting."""
    out = []
    subs = result.subbands or {}
    if "x2_electron" not in subs:
        return out                   # no valley set along z: nothing to split
    total = sum(float(np.sum(sb.occupation)) for b, sb in subs.items()
                if BAND_CARRIER.get(b) == "electron")
    for band in ("x2_electron",):
        sb = subs.get(band)
        if sb is None:
            continue
        occ = np.asarray(sb.occupation, dtype=float)
        deg = np.asarray(sb.degeneracy, dtype=float)
        hit = (occ >= FLOOR_CM2) & (occ >= VALLEY_SPLIT_FRACTION * total) & (deg > 1.5)
        if not np.any(hit):
            continue
        k = int(np.flatnonzero(hit)[0])
        out.append(f"{int(hit.sum())} occupied subband(s) of the X/Delta valleys along z ({band}, "
                   f"{STATE_LABEL[band]}0 ..., {fmt(float(occ[hit].sum()), 'sheet')} cm^-2) are counted "
                   f"{deg[k]:.0f}-fold degenerate: "
                   "this model has no valley splitting; the real splitting (tenths of a meV or less "
                   "in Si/SiGe) depends on the interface sharpness and steps, the vertical field "
                   "and the alloy disorder at the interface")
    return out


@register_check("beyond_gamma")
def check_beyond_gamma(result, structure, deck=None) -> list[str]:
    """physics.exchange_correlation and physics.nonparabolicity act on Gamma electrons (and
    V_xc on holes): X/Delta and L valley subbands holding charge are solved without them."""
    if structure is None:
        return []
    xc = getattr(structure, "exchange_correlation", "none") != "none"
    npb = bool(getattr(structure, "nonparabolicity", False))
    if not (xc or npb):
        return []
    subs = result.subbands or {}
    total = sum(float(np.sum(sb.occupation)) for b, sb in subs.items()
                if BAND_CARRIER.get(b) == "electron")
    held = {b: float(np.sum(sb.occupation)) for b, sb in subs.items()
            if b != "electron" and BAND_CARRIER.get(b) == "electron"}
    held = {b: v for b, v in held.items() if v >= FLOOR_CM2 and v >= BEYOND_GAMMA_FRACTION * total}
    if not held:
        return []
    what = " and ".join(w for w, on in (("the exchange-correlation potential", xc),
                                        ("the nonparabolic mass", npb)) if on)
    bands = ", ".join(f"{b} {v:.3g} cm^-2" for b, v in held.items())
    return [f"{what} act(s) on Gamma electrons only: the valley subbands holding charge here "
            f"({bands}) are solved without it, Hartree and parabolic"]


#: the beyond-Gamma note is given when valley subbands hold this share of the electrons in
#: subbands (and at least FLOOR_CM2)
BEYOND_GAMMA_FRACTION = 0.01


#: the valley-splitting note is given when the Delta2 subbands hold this share of the
#: electrons in subbands (and at least FLOOR_CM2)
VALLEY_SPLIT_FRACTION = 0.01

#: below this |eps_xx| no critical-thickness warning (see the module docstring)
CRITICAL_MIN_STRAIN = 1e-3


@register_check("critical_thickness")
def check_critical_thickness(result, structure, deck=None) -> list[str]:
    """Strained layers (and runs of them) thicker than their Matthews-Blakeslee thickness."""
    sm = getattr(structure, "strain", None)
    if sm is None or not sm.strained:
        return []
    rows = _layer_rows(result)
    name = (lambda k: repr(rows[k]["name"])) if rows else (lambda k: f"layer {k}")
    out = []
    wurtzite = getattr(sm, "crystal", "zincblende") == "wurtzite"
    for L in sm.layers:
        if L.strained and abs(L.eps_xx) >= CRITICAL_MIN_STRAIN and L.thickness > L.critical_thickness:
            if wurtzite:
                out.append(f"strained layer {name(L.index)} ({100 * L.eps_xx:+.2f} % in-plane strain, "
                           f"{L.stress:.1f} GPa tension) is {L.thickness:g} nm thick, beyond its critical "
                           f"thickness for channel cracking {L.critical_thickness:.1f} nm (Hutchinson-Suo "
                           "energy balance with the fracture toughness of GaN): expect cracks and "
                           "relaxation, which lower the piezoelectric sheet and the 2DEG; thin it or "
                           "lower the composition")
                continue
            out.append(f"strained layer {name(L.index)} ({100 * L.eps_xx:+.2f} % in-plane strain) is "
                       f"{L.thickness:g} nm thick, beyond its Matthews-Blakeslee critical thickness "
                       f"{L.critical_thickness:.1f} nm: expect misfit dislocations (relaxation); thin it "
                       "or lower the mismatch")
    strained = {L.index for L in sm.layers if L.strained and abs(L.eps_xx) >= CRITICAL_MIN_STRAIN}
    worst = None
    for first, last, h, hc, eps in sm.windows:
        if first in strained and last in strained and h > hc:
            if worst is None or h / hc > worst[2] / worst[3]:
                worst = (first, last, h, hc, eps)
    if worst is not None and wurtzite:
        first, last, h, hc, eps = worst
        out.append(f"layers {name(first)} to {name(last)} together: {h:g} nm of mean strain "
                   f"{100 * eps:+.2f} %, beyond their critical thickness for channel cracking {hc:.1f} nm "
                   "(the elastic energy of the tensile layers summed, moduli taken equal): the stack may "
                   "crack; thin the tensile layers or lower their composition")
    elif worst is not None:
        first, last, h, hc, eps = worst
        out.append(f"strained layers {name(first)} to {name(last)} together: {h:g} nm with mean strain "
                   f"{100 * eps:+.2f} %, beyond the Matthews-Blakeslee critical thickness {hc:.1f} nm of "
                   "that mean strain (average-strain approximation for a stack under one cap): the "
                   "stack may relax; add strain-compensating layers or thin it")
    return out


#: library alloys whose review valence-offset bowing is fitted to lattice-matched layers and
#: misses their strained offsets on the lattice of the first binary (see the module docstring)
STRAINED_OFFSET_ALLOYS = ("InGaAs",)


@register_check("strained_offset")
def check_strained_offset(result, structure, deck=None) -> list[str]:
    """Compressively strained InGaAs whose conduction offset comes from the review's
    InP-fitted valence-offset bowing (the measured strained offsets are deeper)."""
    sm = getattr(structure, "strain", None)
    if sm is None or not sm.strained or getattr(sm, "crystal", "zincblende") != "zincblende":
        return []
    deck = deck_of(result, deck)
    out = []
    for L in sm.layers:
        if not L.strained or L.eps_xx > -CRITICAL_MIN_STRAIN:
            continue
        info = structure.layers[L.index]
        local = deck.material(info.material)
        alloy, x = info.material, None
        if local is not None:
            if local.params.get("valence_band_offset") is not None:
                continue                    # the deck chose its own offset
            alloy, x = local.base, local.x
        if alloy not in STRAINED_OFFSET_ALLOYS:
            continue
        if x is None:
            xs = [v for v in (info.x_top, info.x_bottom) if v is not None]
            if not xs:
                continue
            x = 0.5 * (min(xs) + max(xs))
        a = ALLOYS[alloy]
        bow = bowing_value(a.bowing["valence_band_offset"], x)
        shift = -x * (1.0 - x) * bow                # eV the bowing raises the valence edge
        if shift <= 0.0:
            continue
        linear = ((1.0 - x) * BINARIES[a.end0]["valence_band_offset"].value
                  + x * BINARIES[a.end1]["valence_band_offset"].value)
        out.append(f"band offset of strained layer {info.name!r} ({alloy} x = {x:.3g}, {100 * L.eps_xx:+.2f} % in-plane "
                   f"strain): its valence offset carries the 2001 review's {alloy} bowing ({bow:+.2f} eV, "
                   f"fitted to InP-matched layers), which lifts the valence edge by {1e3 * shift:.0f} meV and "
                   f"makes the conduction well that much shallower than measured strained wells on GaAs "
                   f"(Qc about 0.65); for the measured offsets give the layer a [material.NAME] with base = "
                   f"\"{alloy}\", x = {x:.3g} and valence_band_offset = {linear:.4g} (the binaries' offsets "
                   "interpolated linearly)")
    return out


#: nm: holes this close to a negative polarization sheet belong to it
HOLE_WINDOW_NM = 5.0


def _sheet_place(t, k, depth, sigma):
    """The text naming interface ``k`` of the /interfaces columns ``t``, made only when a
    warning uses it (most interfaces pass the check)."""
    return lambda: (f"the {str(t['upper'][k])!r}/{str(t['lower'][k])!r} interface (z = {depth[k]:g} nm, "
                    f"polarization sheet {sigma[k]:+.3g} cm^-2)")


@register_check("polarization_holes")
def check_polarization_holes(result, structure, deck=None) -> list[str]:
    """Holes accumulating at a negative polarization sheet (an N-face channel interface, a
    GaN cap on AlGaN): more than 1 % of the main channel and 1e8 cm^-2 within 5 nm of it,
    unless they are the main or a named channel; or, where holes are not counted
    (physics.carriers), the valence edge there within 10 kT of EF."""
    t = result.interfaces or {}
    depth = np.asarray(t.get("depth_nm", []), dtype=float)
    if depth.size == 0:
        return []
    sigma = np.asarray(t["sigma_cm2"], dtype=float)
    z = np.asarray(result.z)
    w = structure.mesh.w if structure is not None else Mesh.from_nodes(z).w
    p = np.asarray(result.profile["hole_density"])
    ev = np.asarray(result.profile["valence_band"])
    main = result.main_channel if result.channels else None
    ns = float(main["sheet_density"]) if main is not None else 0.0
    limit = max(PARALLEL_FRACTION * ns, FLOOR_CM2)
    counted = structure is None or any(b in structure.carriers for b in ("heavy_hole", "light_hole"))
    kT = KB_EV * float(result.temperature)
    out = []
    for k in np.flatnonzero(sigma < -POLARIZATION_MIN_CM2):
        sel = np.abs(z - depth[k]) <= HOLE_WINDOW_NM
        where = _sheet_place(t, k, depth, sigma)
        if not counted:
            top = float(ev[sel].max()) if sel.any() else -np.inf
            if top > -VALLEY_KT * kT:
                out.append(f"holes would accumulate at {where()}: the valence edge lies {1e3 * top:+.0f} meV "
                           f"from EF there, but physics.carriers counts no holes; add \"heavy_hole\" and "
                           "\"light_hole\"")
            continue
        holes = float((p[sel] * w[sel]).sum()) / NM_PER_CM
        if holes <= limit:
            continue
        own = [c for c in (result.channels or []) if c["carrier"] == "hole"
               and c["top_nm"] - HOLE_WINDOW_NM <= depth[k] <= c["bottom_nm"] + HOLE_WINDOW_NM]
        if any(c.get("main") or c.get("named") for c in own):
            continue            # an intended hole channel
        share = f", {100 * holes / ns:.1f} % of the main channel {main['name']!r}" if ns > 0 else ""
        out.append(f"holes accumulate at {where()}: {_fmt_cm2(holes)} within {HOLE_WINDOW_NM:g} nm{share} "
                   f"(limit {_fmt_cm2(limit)}); a two-dimensional hole gas there screens the gate and "
                   "conducts in parallel: thin the layer above the sheet (a cap), dope it n-type to "
                   "compensate the sheet, grade the interface or lower its composition step")
    return out


def interface_alignments(structure) -> list[dict]:
    """Band alignment of every interface between neighbouring layers, from the (strained)
    Gamma edge and the top valence edge of the two cells at the interface: dicts with
    ``upper``, ``lower`` (layer indices), ``z_nm``, ``kind`` ("type I", "type II" or "broken
    gap"), ``gap_eV`` (the interface gap: the lower conduction edge minus the higher valence
    edge of the pair; negative for a broken gap) and ``electrons``/``holes`` (index of the
    layer whose conduction/valence edge confines the carrier)."""
    cl = np.asarray(structure.cell_layer)
    ec = np.asarray(structure.cell["ec_gamma"])
    ev = np.asarray(structure.cell["ev0"])
    z = np.asarray(structure.z)
    out = []
    for c in np.flatnonzero(cl[1:] != cl[:-1]):
        a, b = c, c + 1                     # cells above and below the interface node c + 1
        ia, ib = int(cl[a]), int(cl[b])
        e_low = ia if ec[a] <= ec[b] else ib
        h_high = ia if ev[a] >= ev[b] else ib
        gap = float(min(ec[a], ec[b]) - max(ev[a], ev[b]))
        if gap < 0.0:
            kind = "broken gap"
        elif e_low != h_high:
            kind = "type II"
        else:
            kind = "type I"
        out.append({"upper": ia, "lower": ib, "z_nm": float(z[c + 1]), "kind": kind,
                    "gap_eV": gap, "electrons": e_low, "holes": h_high})
    return out


#: eV: a type-II interface whose interface gap is at least this wide is not flagged: the
#: coupling across it that the single-band model leaves out falls with the inverse interface
#: gap, and wide-gap pairs (a nitride alloy on a strained AlN interlayer) are staggered by
#: strain without any small gap (our own choice)
TYPE_II_GAP_EV = 1.0


@register_check("band_alignment")
def check_band_alignment(result, structure, deck=None) -> list[str]:
    """Type-II and broken-gap interfaces inside a quantum region that hold carriers."""
    if structure is None:
        return []
    rows = _layer_rows(result)
    out = []
    # a property of the structure: once per structure (read-only here)
    for it in derived(structure, "interface_alignments", lambda: interface_alignments(structure)):
        if it["kind"] == "type I" or (it["kind"] == "type II" and it["gap_eV"] >= TYPE_II_GAP_EV):
            continue
        if not any(a - 1e-9 <= it["z_nm"] <= b + 1e-9 for a, b in structure.regions_nm):
            continue
        n = float(rows[it["electrons"]].get("electron_sheet_density_cm2", 0.0)) if rows else 0.0
        p = float(rows[it["holes"]].get("hole_sheet_density_cm2", 0.0)) if rows else 0.0
        if max(n, p) <= FLOOR_CM2:
            continue
        up, lo = rows[it["upper"]], rows[it["lower"]]
        pair = f"{up['material']}/{lo['material']} ({up['name']!r}/{lo['name']!r}, z = {it['z_nm']:g} nm)"
        if it["kind"] == "broken gap":
            what = (f"broken-gap interface {pair}: the conduction edge of one layer lies "
                    f"{-1e3 * it['gap_eV']:.0f} meV below the valence edge of the other")
            miss = ("electron and hole subbands there anticross and hybridise (a gap of a few meV "
                    "opens), which the single-band model, treating them as independent, leaves out; "
                    "the charge transferred across the interface and the subband energies are rough")
        else:
            what = (f"type-II interface {pair}: electrons and holes are confined on opposite sides, "
                    f"interface gap {1e3 * it['gap_eV']:.0f} meV")
            miss = ("the single-band model leaves out the coupling of the electron states to the "
                    "neighbour's valence band across the interface and the non-parabolicity of a "
                    "small gap: subband energies and masses there are only rough")
        out.append(f"{what}; {miss} (a multiband k.p model is needed for accurate numbers)")
    return out


#: at most this many distinct parameter sets of one layer are checked (a graded layer: its
#: cells evenly spaced, both ends included; with Luttinger parameters linear in the
#: composition every curvature bulk_curvatures takes is concave in it, so its ends hold the
#: smallest)
KP_CURVATURE_SAMPLES = 16
#: words of each use of the model (selfcon.solver.kp.CURVATURE_USES)
_KP_USE_TEXT = {"loop": "the loop's axial model", "line_100": "the [100] line",
                "line_110": "the [110] line"}


def _layer_composition(L) -> str:
    if L.x_top is None:
        return L.material
    xb = L.x_bottom if L.x_bottom is not None else L.x_top
    x = f"x = {L.x_top:.3g}" if xb == L.x_top else f"x = {L.x_top:.3g} to {xb:.3g}"
    return f"{L.material} {x}"


def kp_curvature_findings(structure, regions=None) -> list[dict]:
    """Layers inside the quantum regions ``regions`` (indices into ``structure.regions``; all
    when None) of a kp4 / kp6 structure whose bulk hole bands curve the wrong way along a
    direction the model uses (selfcon.solver.kp.bulk_curvatures: an inverse mass <= 0), grouped
    by material and parameters: dicts with ``layers`` (names), ``material`` (with its
    composition), ``gammas`` (g1, g2, g3 of the worst cell), ``bad`` (the Curvatures <= 0) and
    ``curvatures`` (all of that cell's).  [] for the parabolic model.  A property of the
    structure: what `selfcon check` lists and the kp_hole_bands warning repeats."""
    model = getattr(structure, "hole_model", "parabolic")
    if model == "parabolic" or not structure.regions:
        return []
    from selfcon.solver import kp
    nb = kp.MODELS[model]
    cl = np.asarray(structure.cell_layer)
    g = np.stack([np.asarray(structure.cell[k], float) for k in ("gamma1", "gamma2", "gamma3")], axis=1)
    chosen = range(len(structure.regions)) if regions is None else sorted(set(int(r) for r in regions))
    cells: dict = {}
    for r in chosen:
        i0, i1 = structure.regions[r]
        for c in range(i0, i1):
            cells.setdefault(int(cl[c]), []).append(c)
    groups: dict = {}
    for layer, idx in sorted(cells.items()):
        triples = np.unique(g[idx], axis=0)
        if len(triples) > KP_CURVATURE_SAMPLES:
            triples = triples[np.unique(np.linspace(0, len(triples) - 1, KP_CURVATURE_SAMPLES).round().astype(int))]
        worst = None
        for t in triples:
            curv = kp.bulk_curvatures(*t, nb)
            low = min(c.inverse_mass for c in curv)
            if worst is None or low < worst[0]:
                worst = (low, tuple(float(v) for v in t), curv)
        low, gammas, curv = worst
        if low > 0.0:
            continue
        L = structure.layers[layer]
        key = (_layer_composition(L), gammas)
        if key not in groups:
            groups[key] = {"layers": [], "material": key[0], "gammas": gammas, "model": model,
                           "bad": [c for c in curv if c.inverse_mass <= 0.0], "curvatures": curv}
        groups[key]["layers"].append(L.name)
    return list(groups.values())


def _mass_text(inv: float) -> str:
    return "infinite mass" if inv == 0.0 else f"m = {1.0 / inv:+.3g} m0"


def _curvature_items(bad, regime: str) -> list[str]:
    """The findings of one regime, one item per closed form and value (the uses sharing it
    named together)."""
    items: dict = {}
    for c in bad:
        if c.regime != regime:
            continue
        key = (c.combination or c.use, round(c.inverse_mass, 9))
        items.setdefault(key, []).append(c)
    out = []
    for (_, value), cs in items.items():
        c = cs[0]
        form = f"{c.combination} = {value:+.3g}" if c.combination else f"1/m = {value:+.3g}"
        dirs = " / ".join(dict.fromkeys(x.direction for x in cs))
        where = f"at {dirs}" if dirs[0].isdigit() else f"along {dirs}"
        mass = f"{_mass_text(value)}, " if regime == "zone centre" else ""
        out.append(f"{form} {where} ({mass}{' and '.join(_KP_USE_TEXT[x.use] for x in cs)})")
    return out


def kp_curvature_text(f: dict, *, before_solve: bool = False) -> str:
    """The one line of a finding of :func:`kp_curvature_findings`: the layers, their
    parameters, every curvature <= 0 (its closed form where the direction has one, and the
    uses of the model it reaches) and what it makes unreliable."""
    several = len(f["layers"]) > 1
    names = ", ".join(repr(n) for n in f["layers"])
    g1, g2, g3 = f["gammas"]
    parts = []
    near = _curvature_items(f["bad"], "zone centre")
    if near:
        parts.append("zone-centre heavy hole " + ", ".join(near))
    far = _curvature_items(f["bad"], "large k")
    if far:
        parts.append("beyond the split-off gap (kp6) " + ", ".join(far))
    bad_uses = {c.use for c in f["bad"]}
    reach = "that would reach" if before_solve else "reaching"
    there = "those layers" if several else "that layer"
    if "loop" in bad_uses:
        effect = (f"the multiband hole states {reach} {there} (the loop's subbands, hole charge and "
                  "masses) and the [100]/[110] output lines there are unreliable")
    else:
        loop = min(c.inverse_mass for c in f["curvatures"] if c.use == "loop")
        lines = [u[5:] for u in ("line_100", "line_110") if u in bad_uses]
        effect = (f"the loop's axial model is unaffected (its smallest 1/m there is {loop:+.3g}), but the "
                  f"warped [{']/['.join(lines)}] output line{'s' if len(lines) > 1 else ''} "
                  f"(/subbands/hole_kp/dispersion_{'/'.join(lines)}) of the states {reach} {there} "
                  f"{'are' if len(lines) > 1 else 'is'} unreliable")
    only_far = not near
    fix = (f"give {there} Luttinger parameters that make these positive (luttinger_gamma1..3 of a "
           "[material.NAME]), or use "
           + ("hole_model = \"kp4\" (no split-off band)" if only_far else
              "hole_model = \"parabolic\" (masses from gamma1 -+ 2 gamma2 and gamma1 +- gamma2)"))
    return (f"bulk hole band of {'layers' if several else 'layer'} {names} ({f['material']}; gamma1 {g1:.4g}, "
            f"gamma2 {g2:.4g}, gamma3 {g3:.4g}) curves the wrong way in the {f['model']} model (its "
            "valence band top is not at Gamma): " + "; ".join(parts) + f"; {effect}: {fix}")


@register_check("kp_hole_bands")
def check_kp_hole_bands(result, structure, deck=None) -> list[str]:
    """Layers inside a quantum region whose multiband holes were solved (kp4 / kp6) whose
    Luttinger parameters give a bulk hole band curving the wrong way along a direction the
    model uses (kp_curvature_findings)."""
    if structure is None or getattr(structure, "hole_model", "parabolic") == "parabolic":
        return []
    hk = result.hole_kp or {}
    solved = np.unique(np.asarray(hk.get("region", []), dtype=np.int64))
    if solved.size == 0:
        return []
    # a property of the structure and the regions solved (read-only here)
    found = derived(structure, ("kp_curvatures", tuple(solved.tolist())),
                    lambda: kp_curvature_findings(structure, solved))
    return [kp_curvature_text(f) for f in found]


def design_warnings(result, structure, deck=None) -> list[str]:
    """Every design warning for a solved structure (one line each, with the numbers), from
    every registered check in order.  ``deck``: the Deck solved (read from
    ``result.deck_text`` by the checks that need it when not given)."""
    out = []
    for name, check in list(CHECKS.items()):
        try:
            out.extend(check(result, structure, deck))
        except Exception as exc:      # a check must never break a solve
            out.append(f"design check {name!r} could not run ({type(exc).__name__}: {exc})")
    return out
