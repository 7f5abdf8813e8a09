"""The layout of every file selfcon writes: each variable declared once, here.

Data only: this module imports nothing of selfcon.  A declaration names a variable's
group and name, its ``units`` (UDUNITS-2 strings), ``long_name``, ``description`` and
named dimensions.  Everything else takes them from here: the HDF5 writers (the result
file in :mod:`selfcon.output.result`, the bias sweep in :mod:`selfcon.design.sweep`, the
study table in :mod:`selfcon.batch.runner`, all through :mod:`selfcon.output.netcdf`),
the readers, the CSV export and the README's layout tables (``python tools/file_layout.py``
regenerates them; a test checks they are current).

Adding a dataset is one declaration, e.g. for a new profile::

    RESULT.declare("profile/strain_xx", "1", "in-plane strain",
                   "epsilon_xx = (a_substrate - a_layer) / a_layer", dims=("z",))

and, if it needs a dimension no file has yet, one :func:`declare_dim` call.  The writers
refuse variables that are not declared (the error names this file).

netCDF-4 compatibility: every group holds its own coordinate variable for each dimension
its variables use (a dataset named like the dimension, made an HDF5 dimension scale),
because readers such as h5netcdf do not resolve scales across sibling groups.  The
coordinate of an index dimension (``state``, ``region``, ...) is the index itself.

Two units strings are ours and UDUNITS-2 misreads them (see :data:`NOT_UDUNITS`): ``m0``
(the free-electron mass) and ``nm-1/2`` (nm to the power -1/2).
"""
from __future__ import annotations

from dataclasses import dataclass, field

#: units strings UDUNITS-2 parses as something else: string -> (what we mean, what UDUNITS reads)
NOT_UDUNITS = {
    "m0": ("the free-electron mass, unit of effective masses", "m^0 = 1"),
    "nm-1/2": ("nm^(-1/2), unit of envelope functions", "nm^-1 divided by 2"),
}


@dataclass(frozen=True)
class Dim:
    """A named dimension and the coordinate variable each group using it gets.

    ``start``: the coordinate is the index ``start, start + 1, ...``; ``labels``: the
    coordinate is this fixed list of strings; neither: the writer gives the values
    (depths, layer names, biases, job ids, ...).
    """

    name: str
    units: str
    long_name: str
    description: str
    start: int | None = None
    labels: tuple[str, ...] = ()


@dataclass(frozen=True)
class Var:
    """One variable (HDF5 dataset) of a file.

    ``path`` is ``group/name``; a group part in angle brackets (``subbands/<band>/energy``)
    stands for any group name.  ``units`` None: the writer gives them (per file).
    ``when``: the condition under which the variable is written (empty: always).
    ``flat``: the variable's name in a flattened reader (``selfcon.open_sweep``).
    """

    path: str
    units: str | None
    long_name: str
    description: str
    dims: tuple[str, ...] = ()
    when: str = ""
    flat: str = ""

    @property
    def group(self) -> str:
        return self.path.rpartition("/")[0]

    @property
    def name(self) -> str:
        return self.path.rpartition("/")[2]


#: every dimension of every file, by name
DIMS: dict[str, Dim] = {}


def declare_dim(name, units, long_name, description, *, start=None, labels=()) -> Dim:
    """Declare a dimension (once).  See :class:`Dim`."""
    if name in DIMS:
        raise ValueError(f"dimension {name!r} is already declared")
    DIMS[name] = Dim(name, units, long_name, description, start, tuple(labels))
    return DIMS[name]


def _matches(pattern: str, path: str) -> bool:
    a, b = pattern.split("/"), path.split("/")
    return len(a) == len(b) and all(x == y or (x.startswith("<") and x.endswith(">")) for x, y in zip(a, b))


@dataclass
class Layout:
    """The declared variables of one kind of file, in declaration (= writing) order."""

    schema: str
    version: int
    title: str
    vars: dict[str, Var] = field(default_factory=dict)
    groups: dict[str, str] = field(default_factory=dict)    # group path -> description
    coords: dict[str, tuple] = field(default_factory=dict)  # group path -> coordinates no variable uses
    order: list[str] = field(default_factory=list)          # groups, in the order first declared
    hidden: dict[str, tuple] = field(default_factory=dict)  # group -> coordinates that are dimensions only

    def declare(self, path, units, long_name, description, *, dims=(), when="", flat="") -> Var:
        """Declare one variable (once).  Its dimensions must be declared first."""
        if path in self.vars:
            raise ValueError(f"{self.schema}: {path!r} is already declared")
        for d in dims:
            if d not in DIMS:
                raise ValueError(f"{self.schema}: {path!r} uses undeclared dimension {d!r} (declare_dim first)")
        self.vars[path] = v = Var(path, units, long_name, description, tuple(dims), when, flat)
        if v.group not in self.order:
            self.order.append(v.group)
        return v

    def group(self, path, description, *, coords=()) -> None:
        """Declare a group's description (written as its ``description`` attribute) and the
        coordinates it holds that none of its variables uses (``/mesh/z``)."""
        self.groups[path] = description
        if path not in self.order:
            self.order.append(path)
        if coords:
            self.coords[path] = tuple(coords)

    def dimension_only(self, group: str, dim: str) -> None:
        """Make ``dim``'s coordinate in ``group`` a netCDF "dimension but not a variable": netCDF
        readers see the dimension and no coordinate (h5py still reads the values).  For the
        root, whose coordinates xarray would pass down to every group, where a variable of
        the same name may live (``/channels/layer``)."""
        self.hidden[group] = self.hidden.get(group, ()) + (dim,)

    def group_coords(self, group: str) -> list[str]:
        """The coordinate variables of ``group``: its extra ones, then its variables' dimensions."""
        out = list(self.coords.get(group, ()))
        for v in self.vars.values():
            if v.group == group:
                out += [d for d in v.dims if d not in out]
        return out

    def group_description(self, path: str) -> str:
        """The declared description of group ``path`` (a pattern group matches too), or ""."""
        if path in self.groups:
            return self.groups[path]
        return next((d for g, d in self.groups.items() if "<" in g and _matches(g, path)), "")

    def get(self, path: str) -> Var | None:
        """The declaration of ``path`` (exact, else the first pattern that matches), or None."""
        v = self.vars.get(path)
        if v is not None:
            return v
        for v in self.vars.values():
            if "<" in v.path and _matches(v.path, path):
                return v
        return None

    def require(self, path: str) -> Var:
        v = self.get(path)
        if v is None:
            raise KeyError(f"{self.schema}: {path!r} is not declared; declare it in selfcon/output/schema.py "
                           f"(name, units, long_name, description, dimensions)")
        return v

    def in_group(self, group: str) -> list[Var]:
        """Declared variables of ``group`` (a pattern group such as ``subbands/<band>`` matches too)."""
        return [v for v in self.vars.values() if v.group == group or ("<" in v.group and _matches(v.group, group))]


# --------------------------------------------------------------------------- dimensions

declare_dim("z", "nm", "depth", "node depth, z = 0 at the top surface, growing into the wafer")
declare_dim("state", "1", "state index", "bound state of the band, in energy order (0: the ground state)", start=0)
declare_dim("region", "1", "quantum region index", "row of /mesh/quantum_regions", start=0)
declare_dim("side", "1", "side", "side of a quantum region: top or bottom", labels=("top", "bottom"))
declare_dim("layer", "1", "layer", "deck layer name, top to bottom")
declare_dim("iteration", "1", "iteration", "self-consistent iteration, 1 = the first", start=1)
declare_dim("bias", "V", "gate bias", "gate bias on the surface contact, in sweep order")
declare_dim("end", "1", "window end", "low and high end of a bias window", labels=("low", "high"))
declare_dim("job", "1", "job id", "job id (jobs/<id>.h5)")
declare_dim("channel", "1", "channel index", "row of /channels: a channel, top first", start=0)
declare_dim("transition", "1", "transition index", "row of /transitions", start=0)
declare_dim("interface", "1", "interface index", "row of /interfaces: a layer interface, top first", start=0)
declare_dim("kp_state", "1", "multiband hole state",
            "hole state of the Luttinger-Kohn model (one spin branch each), lowest hole energy first",
            start=0)
declare_dim("k_parallel", "nm-1", "in-plane wave vector", "magnitude of the in-plane wave vector k_par")
declare_dim("component", "1", "basis state",
            "J basis state of the Luttinger-Kohn Hamiltonian (Chuang 1995): 0 |3/2,+3/2>, "
            "1 |3/2,+1/2>, 2 |3/2,-1/2>, 3 |3/2,-3/2> (heavy, light, light, heavy hole); kp6 also "
            "4 |1/2,+1/2>, 5 |1/2,-1/2> (split-off)", start=0)


# --------------------------------------------------------------------------- the result file

#: band names used under /subbands: the quantum bands, then the conduction valley sets of
#: physics.quantum_valleys (x2: X/Delta valleys along z; x4: those in the plane; l: L valleys)
BANDS = ("electron", "heavy_hole", "light_hole", "x2_electron", "x4_electron", "l_electron")
#: the bands written only with physics.quantum_valleys
VALLEY_BANDS = ("x2_electron", "x4_electron", "l_electron")

ROOT_ATTRS = ("schema", "schema_version", "selfcon_version", "created", "title", "temperature_K",
              "converged", "iterations", "residual_V", "message", "deck", "checksum")

RESULT = Layout("selfcon.result", 1, "result of one solve")
SCHEMA = RESULT.schema
SCHEMA_VERSION = RESULT.version
_r = RESULT.declare

RESULT.group("mesh", "finite-volume mesh; every profile is aligned with /mesh/z", coords=("z",))
_r("mesh/quantum_regions", "nm", "quantum region bounds",
   "[top, bottom] of each quantum region; states are solved there, classical densities elsewhere",
   dims=("region", "side"))

RESULT.group("profile", "profiles at the nodes of /mesh/z; energies relative to EF = 0 eV")
_r("profile/conduction_band", "eV", "conduction band edge",
   "Gamma conduction band edge with electrostatics, relative to EF", dims=("z",))
_r("profile/valence_band", "eV", "valence band edge",
   "top valence band edge with electrostatics, relative to EF", dims=("z",))
_r("profile/potential", "V", "electrostatic potential",
   "electrostatic potential phi; band edges are E0(z) - q*phi(z)", dims=("z",))
_r("profile/electric_field", "V/cm", "electric field", "electric field E = -dphi/dz at the nodes", dims=("z",))
_r("profile/electron_density", "cm-3", "electron density",
   "electron density (subbands in quantum regions, classical elsewhere)", dims=("z",))
_r("profile/hole_density", "cm-3", "hole density",
   "hole density (subbands in quantum regions, classical elsewhere)", dims=("z",))
_r("profile/ionized_donors", "cm-3", "ionised donor density",
   "ionised donor density, sheets spread over their dual cell", dims=("z",))
_r("profile/ionized_acceptors", "cm-3", "ionised acceptor density",
   "ionised acceptor density, sheets spread over their dual cell", dims=("z",))
_r("profile/conduction_band_x", "eV", "X-valley conduction band edge",
   "X-valley conduction band edge with electrostatics, relative to EF", dims=("z",))
_r("profile/conduction_band_l", "eV", "L-valley conduction band edge",
   "L-valley conduction band edge with electrostatics, relative to EF", dims=("z",))
_r("profile/heavy_hole_band", "eV", "heavy-hole band edge",
   "heavy-hole band edge with electrostatics, relative to EF (strain-shifted in strained layers)", dims=("z",))
_r("profile/light_hole_band", "eV", "light-hole band edge",
   "light-hole band edge with electrostatics, relative to EF (strain-shifted in strained layers)", dims=("z",))
_r("profile/strain_xx", "1", "in-plane strain",
   "in-plane strain eps_xx = (a_par - a)/a of the cell to the right of each node (0 in an unstrained stack)",
   dims=("z",))
_r("profile/strain_zz", "1", "growth-axis strain",
   "strain along the growth axis, eps_zz = -2 (C12/C11) eps_xx (wurtzite: -2 (C13/C33) eps_xx)", dims=("z",))
_r("profile/x_electron_density", "cm-3", "X-valley electron density",
   "X/Delta-valley electrons (classical; with physics.quantum_valleys the x2 and x4 subbands in quantum "
   "regions; part of electron_density)", dims=("z",),
   when="physics.carriers has x_electron")
_r("profile/l_electron_density", "cm-3", "L-valley electron density",
   "L-valley electrons (classical; with physics.quantum_valleys the l subbands in quantum regions; part of "
   "electron_density)", dims=("z",),
   when="physics.carriers has l_electron")
_r("profile/exchange_correlation", "eV", "electron exchange-correlation potential",
   "local-density exchange-correlation potential energy V_xc (<= 0) of the Gamma electrons, added to "
   "conduction_band in their Schrodinger equation only (Poisson keeps the Hartree potential); "
   "selfcon/solver/exchange.py", dims=("z",), when="physics.exchange_correlation is not none")
_r("profile/exchange_correlation_hole", "eV", "heavy-hole exchange-correlation potential",
   "local-density exchange-correlation potential energy V_xc (<= 0) of the heavy holes on their own energy "
   "scale: the edge their Schrodinger equation sees is heavy_hole_band - V_xc", dims=("z",),
   when="physics.exchange_correlation is not none and physics.carriers has heavy_hole")
_r("profile/polarization", "C/m^2", "polarization along z",
   "polarization P_z along +z (into the wafer) of the cell to the right of each node: spontaneous plus "
   "piezoelectric, wurtzite layers only (0 in zincblende stacks)", dims=("z",))
_r("profile/bound_charge", "cm-3", "bound polarization charge",
   "bound polarization sheets spread over their dual cells (as ionized_donors spreads delta sheets): the net "
   "charge is p - n + Nd+ - Na- + bound_charge", dims=("z",))
_r("profile/layer_index", "1", "layer index", "index into /layers of the layer holding each node", dims=("z",))

#: material parameters written as /profile/<key>: Structure.cell[key] of the cell to the right
#: of each node, each declared above like the other profiles ("How to add a material
#: parameter" in selfcon/input/materials/__init__.py)
MATERIAL_PROFILES: tuple = ()

RESULT.dimension_only("", "layer")
_r("layers", None, "layer table (compound)",
   "one row per deck layer, top to bottom; 'units' and 'column_descriptions' list one entry per column, "
   "in column order", dims=("layer",))

RESULT.group("layer_table", "the columns of /layers as one variable each (netCDF readers cannot read "
                            "the compound /layers)")
_LAYER_COLUMNS = (
    ("name", "1", "layer name", "layer name from the deck (or its index when unnamed)", ""),
    ("material", "1", "material", "material name", ""),
    ("x_top", "1", "alloy fraction at the top", "alloy fraction at the top of the layer (NaN for binaries)", ""),
    ("x_bottom", "1", "alloy fraction at the bottom",
     "alloy fraction at the bottom of the layer (NaN for binaries)", ""),
    ("top_nm", "nm", "top depth", "depth of the top interface", ""),
    ("bottom_nm", "nm", "bottom depth", "depth of the bottom interface", ""),
    ("electron_sheet_density_cm2", "cm-2", "electron sheet density", "electrons integrated over the layer", ""),
    ("hole_sheet_density_cm2", "cm-2", "hole sheet density", "holes integrated over the layer", ""),
    ("ionized_donor_sheet_density_cm2", "cm-2", "ionised donor sheet density",
     "ionised donors integrated over the layer", ""),
    ("ionized_acceptor_sheet_density_cm2", "cm-2", "ionised acceptor sheet density",
     "ionised acceptors integrated over the layer", ""),
    ("y_top", "1", "second composition at the top",
     "second composition (quaternaries) at the top of the layer (NaN otherwise)", ""),
    ("y_bottom", "1", "second composition at the bottom",
     "second composition (quaternaries) at the bottom of the layer (NaN otherwise)", ""),
    ("relaxed", "1", "relaxed layer",
     "1 for a relaxed (metamorphic) layer: the layers above take its lattice", ""),
    ("strain_xx", "1", "in-plane strain", "in-plane strain, thickness-weighted mean over the layer (0: unstrained)",
     ""),
    ("strain_zz", "1", "growth-axis strain", "strain along the growth axis, thickness-weighted mean over the layer",
     ""),
    ("lattice_inplane_nm", "nm", "in-plane lattice constant",
     "in-plane lattice constant the layer grows on (at its top; its own lattice constant in an unstrained "
     "stack or a relaxed layer)", ""),
    ("lattice_own_nm", "nm", "own lattice constant",
     "the layer's own (relaxed) lattice constant at the temperature, mean", ""),
    ("critical_thickness_nm", "nm", "critical thickness",
     "critical thickness of the layer on its own (inf: unstrained or relaxed): Matthews-Blakeslee for "
     "zincblende layers, channel cracking under tension for wurtzite layers; see the design warnings for "
     "runs of strained layers", ""),
)
for _name, _units, _long, _desc, _when in _LAYER_COLUMNS:
    _r(f"layer_table/{_name}", _units, _long, _desc, dims=("layer",), when=_when)

RESULT.group("subbands", "bound states per band, ordered by energy")
RESULT.group("subbands/<band>", "one group per band of physics.carriers with states: electron, heavy_hole, "
                                "light_hole; with physics.quantum_valleys also x2_electron (the X/Delta valleys "
                                "whose axis is z: 2 Delta valleys in Si and Ge, 1 X valley in zincblende; mass m_l "
                                "along z), x4_electron (the X/Delta valleys in the plane: 4 in Si and Ge, 2 in "
                                "zincblende; m_t along z) and l_electron (the 4 L valleys, mass projected on [001])")
_r("subbands/<band>/energy", "eV", "subband energy",
   "subband edge energy relative to EF (hole states in electron energy)", dims=("state",))
_r("subbands/<band>/occupation", "cm-2", "subband sheet density", "sheet density held by the subband",
   dims=("state",))
_r("subbands/<band>/wavefunction", "nm-1/2", "envelope function",
   "envelope function psi(z) per state (columns), integral of |psi|^2 dz = 1, zero outside its quantum region",
   dims=("z", "state"))
_r("subbands/<band>/in_plane_mass", "m0", "in-plane effective mass",
   "in-plane effective mass used for the 2D density of states (with physics.nonparabolicity, for Gamma "
   "electrons: the subband-bottom mass times the density-of-states rise over its carriers' mean in-plane "
   "energy, selfcon/solver/nonparabolic.py)", dims=("state",))
_r("subbands/<band>/region", "1", "quantum region",
   "index of the quantum region (/mesh/quantum_regions) holding the state", dims=("state",))
_r("subbands/<band>/degeneracy", "1", "valley degeneracy",
   "valley degeneracy used for the occupation (spin excluded)", dims=("state",))
_r("subbands/<band>/channel", "1", "channel of the state",
   "index into /channels of the channel holding most of the state's |psi|^2 (more than half of it), "
   "-1 for none", dims=("state",))
_r("subbands/<band>/bound", "1", "bound state",
   "1 if the energy lies below the band edge at both ends of the quantum region (holes: above it), "
   "0 for a state of the region's box above a barrier", dims=("state",))

#: the multiband hole states (physics.hole_model kp4 | kp6; selfcon/solver/kp.py): a group of its
#: own under /subbands, with the in-plane dispersion
KP_GROUP = "subbands/hole_kp"
RESULT.group(KP_GROUP, "multiband (Luttinger-Kohn) hole states of the quantum regions, one spin "
                       "branch each, with their in-plane dispersion (physics.hole_model kp4 | kp6)")
_r("subbands/hole_kp/energy", "eV", "hole subband energy",
   "energy of the state at k_par = 0 relative to EF (electron energy scale)", dims=("kp_state",),
   when="physics.hole_model is kp4 or kp6")
_r("subbands/hole_kp/occupation", "cm-2", "hole subband sheet density",
   "holes held by the state, integrated over k_par", dims=("kp_state",), when="physics.hole_model is kp4 or kp6")
_r("subbands/hole_kp/region", "1", "quantum region",
   "index of the quantum region (/mesh/quantum_regions) holding the state", dims=("kp_state",),
   when="physics.hole_model is kp4 or kp6")
_r("subbands/hole_kp/dispersion", "eV", "hole subband dispersion",
   "E(k_par) relative to EF of each state, in the axial approximation (attribute direction), on "
   "the grid the hole density integrates", dims=("kp_state", "k_parallel"), when="physics.hole_model is kp4 or kp6")
_r("subbands/hole_kp/dispersion_100", "eV", "hole dispersion along [100]",
   "E(k_par) with k_par along [100], the full (warped) Hamiltonian; states in energy order at "
   "each k_par", dims=("kp_state", "k_parallel"), when="physics.hole_model is kp4 or kp6")
_r("subbands/hole_kp/dispersion_110", "eV", "hole dispersion along [110]",
   "E(k_par) with k_par along [110], the full (warped) Hamiltonian; states in energy order at "
   "each k_par", dims=("kp_state", "k_parallel"), when="physics.hole_model is kp4 or kp6")
_r("subbands/hole_kp/wavefunction", "nm-1/2", "envelope function components",
   "|psi_j(z)| of each basis state j at k_par = 0; sum over j of the integral of |psi_j|^2 dz = 1",
   dims=("z", "kp_state", "component"), when="physics.hole_model is kp4 or kp6")
_r("subbands/hole_kp/channel", "1", "channel of the state",
   "index into /channels of the channel holding most of the state's density at k_par = 0 (sum over j "
   "of |psi_j|^2; more than half of it), -1 for none", dims=("kp_state",), when="physics.hole_model is kp4 or kp6")
_r("subbands/hole_kp/mass_band_edge", "m0", "in-plane mass at k_par = 0",
   "hbar^2 k / (dE/dk) over the first k_par step (negative: the hole energy falls as k_par grows)",
   dims=("kp_state",), when="physics.hole_model is kp4 or kp6")
_r("subbands/hole_kp/mass_fermi", "m0", "in-plane mass at EF",
   "hbar^2 k / (dE/dk) where the state crosses EF; NaN for a state that does not", dims=("kp_state",),
   when="physics.hole_model is kp4 or kp6")
_r("subbands/hole_kp/k_fermi", "nm-1", "Fermi wave vector",
   "k_par where the state crosses EF; NaN for a state that does not", dims=("kp_state",),
   when="physics.hole_model is kp4 or kp6")
_r("subbands/hole_kp/spin_splitting", "eV", "spin splitting at EF",
   "|E| difference of the two spin branches of the state's pair at the k_fermi of the pair's "
   "upper branch (0 in a symmetric well); NaN where the pair does not cross EF", dims=("kp_state",),
   when="physics.hole_model is kp4 or kp6")

RESULT.group("channels", "channels: depth intervals where one carrier kind is confined, one entry per "
                         "channel along the 'channel' dimension, top first")
_c = (
    ("name", "1", "channel name", "channel name: a [[channel]] of the deck, the layer holding it, or "
                                  "electron<N> / hole<N> numbered from the surface"),
    ("carrier", "1", "carrier", "carrier confined in the channel: electron or hole"),
    ("top_nm", "nm", "channel top", "depth of the top of the channel's interval"),
    ("bottom_nm", "nm", "channel bottom", "depth of the bottom of the channel's interval"),
    ("sheet_density", "cm-2", "channel sheet density",
     "population of its subbands (tails included) plus the classical carriers inside its interval"),
    ("ground_energy", "eV", "ground subband energy",
     "E0 minus the carrier's Fermi level, in the carrier's own sense: positive when the ground subband lies "
     "on the empty side"),
    ("spacing", "eV", "subband spacing", "E1 - E0 of the channel's own subbands (positive), NaN with one state; "
     "multiband holes: the gap from the ground Kramers pair to the next"),
    ("occupied_subbands", "1", "occupied subbands",
     "subbands holding at least 1 % of the channel's sheet density and at least 1e8 cm-2 (multiband holes: "
     "Kramers pairs, both spin branches together)"),
    ("centroid_nm", "nm", "carrier centroid", "mean depth of the channel's carriers"),
    ("in_plane_mass", "m0", "in-plane effective mass", "in-plane effective mass of the channel's ground subband "
     "(multiband holes: the mean of the ground pair's masses at EF, /subbands/hole_kp/mass_fermi)"),
    ("layer", "1", "channel layer", "the layer holding most of the channel's carriers"),
    ("named", "1", "named channel",
     "1 for a channel named in a [[channel]] table of the deck, 0 for an auto-detected one"),
    ("main", "1", "main channel", "1 for the main channel (the first [[channel]] of the deck, else the one "
                                  "with most carriers of the majority kind outside the layers doped for "
                                  "them, when there is one), 0 otherwise"),
)
for _name, _units, _long, _desc in _c:
    _r(f"channels/{_name}", _units, _long, _desc, dims=("channel",))

RESULT.group("transitions", "interband transitions: every electron - heavy-hole and electron - light-hole "
                            "pair of the stored states, along the 'transition' dimension")
_x = (
    ("electron_state", "1", "electron state", "index of the electron state in /subbands/electron"),
    ("hole_band", "1", "hole band", "band of the hole state: heavy_hole or light_hole"),
    ("hole_state", "1", "hole state", "index of the hole state in /subbands/<hole_band>"),
    ("energy", "eV", "transition energy", "transition energy E_e - E_h"),
    ("overlap", "1", "envelope overlap", "envelope overlap |<psi_e|psi_h>|^2"),
)
for _name, _units, _long, _desc in _x:
    _r(f"transitions/{_name}", _units, _long, _desc, dims=("transition",))

RESULT.group("interfaces", "layer interfaces, top first, along the 'interface' dimension: depth and the "
                           "bound polarization sheet of wurtzite stacks (zero in zincblende stacks)")
_i = (
    ("depth_nm", "nm", "interface depth", "depth of the interface (the node between the two layers)"),
    ("sigma_cm2", "cm-2", "bound sheet charge",
     "bound polarization sheet sigma = P_z(above) - P_z(below) in elementary charges per area (positive: "
     "positive charge; P_z along +z, into the wafer)"),
    ("sigma_C_m2", "C/m^2", "bound sheet charge (SI)", "the same sheet in C/m^2"),
    ("upper", "1", "layer above", "name of the layer above the interface"),
    ("lower", "1", "layer below", "name of the layer below the interface"),
)
for _name, _units, _long, _desc in _i:
    _r(f"interfaces/{_name}", _units, _long, _desc, dims=("interface",))

RESULT.group("convergence", "history of the self-consistent loop, one entry per iteration")
_r("convergence/residual", "V", "potential residual", "max |delta phi| between successive iterations",
   dims=("iteration",))
_r("convergence/record_residual", "V", "recorded residual",
   "the loop's own per-iteration residual", dims=("iteration",),
   when="it differs from /convergence/residual")
_r("convergence/charge_residual", "1", "charge residual",
   "relative change of the mobile sheet charge over the iteration (NaN: not evaluated, the potential "
   "was still far from converged)", dims=("iteration",))
_r("convergence/newton_steps", "1", "Newton steps", "inner Newton steps of the nonlinear Poisson solve",
   dims=("iteration",))
_r("convergence/seconds", "s", "iteration time", "wall time spent in the iteration", dims=("iteration",))
_r("convergence/damping", "1", "damping factor", "damping / mixing factor applied in the iteration",
   dims=("iteration",))


def _fields(layout, group):
    return {v.name: (v.units, v.description) for v in layout.in_group(group)}


#: name -> (units, description) views of the declarations above (do not add entries here)
PROFILE_FIELDS = {k: v for k, v in _fields(RESULT, "profile").items()
                  if k not in ("layer_index", "conduction_band_x", "conduction_band_l",
                               "x_electron_density", "l_electron_density")}
SUBBAND_FIELDS = _fields(RESULT, "subbands/<band>")
#: the variables of /subbands/hole_kp (exact declarations, not the <band> pattern)
KP_FIELDS = tuple(v.name for v in RESULT.vars.values() if v.group == KP_GROUP)
CHANNEL_FIELDS = _fields(RESULT, "channels")
TRANSITION_FIELDS = _fields(RESULT, "transitions")
INTERFACE_FIELDS = _fields(RESULT, "interfaces")
RECORD_FIELDS = {k: v for k, v in _fields(RESULT, "convergence").items() if k != "record_residual"}


# --------------------------------------------------------------------------- the bias-sweep file

SWEEP = Layout("selfcon.bias_sweep", 1, "bias sweep (selfcon sweep-bias)")
_s = SWEEP.declare

_s("converged", "1", "converged", "1 if the point converged", dims=("bias",), flat="converged")
_s("iterations", "1", "iterations", "self-consistent iterations of the point", dims=("bias",), flat="iterations")
_s("warm_start", "1", "warm start", "1 if the point converged from the previous point's potential",
   dims=("bias",), flat="warm_start")
SWEEP.group("sheet_density", "sheet densities per bias point")
_s("sheet_density/electrons_total", "cm-2", "electron sheet density", "electrons per area in the whole stack",
   dims=("bias",), flat="electrons_total")
_s("sheet_density/holes_total", "cm-2", "hole sheet density", "holes per area in the whole stack",
   dims=("bias",), flat="holes_total")
_s("sheet_density/channel", "cm-2", "main-channel sheet density",
   "sheet density of the main channel (root attributes channel and channel_layer), followed by depth "
   "over the sweep", dims=("bias",), flat="channel_density")
_s("sheet_density/doping_layers", "cm-2", "doping-layer electrons",
   "electrons per area in the doping layers (donor-doped layers other than the channel): free electrons "
   "plus electrons bound on neutral donors (Nd - Nd+)", dims=("bias",), flat="doping_electrons")
_s("sheet_density/doping_layers_free", "cm-2", "free doping-layer electrons",
   "free (conduction-band) electrons per area in the doping layers", dims=("bias",),
   flat="doping_free_electrons")
SWEEP.group("layers", "per-layer sheet densities, (bias, layer)")
_s("layers/name", "", "layer name", "layer names, top to bottom (columns of the per-layer datasets)",
   dims=("layer",))
_s("layers/electrons", "cm-2", "layer electrons", "electrons per area in each layer, (bias, layer)",
   dims=("bias", "layer"), flat="layer_electrons")
_s("layers/holes", "cm-2", "layer holes", "holes per area in each layer, (bias, layer)",
   dims=("bias", "layer"), flat="layer_holes")
_s("layers/ionized_donors", "cm-2", "layer ionised donors", "ionised donors per area, (bias, layer)",
   dims=("bias", "layer"), flat="layer_ionized_donors")
SWEEP.group("subbands", "subband energies and sheet densities per band, (bias, state)")
SWEEP.group("subbands/<band>", "one group per band with states: electron, heavy_hole, light_hole")
_s("subbands/<band>/energy", "eV", "subband energy",
   "subband energies relative to EF, (bias, state), NaN where absent", dims=("bias", "state"),
   flat="subband_energy")
_s("subbands/<band>/occupation", "cm-2", "subband sheet density",
   "subband sheet densities, (bias, state), NaN where absent", dims=("bias", "state"),
   flat="subband_occupation")
SWEEP.group("mesh", "mesh nodes of the profiles", coords=("z",))
_s("gate_charge", "C/cm2", "gate charge",
   "Q = -q * integral (p - n + Nd+ - Na- + bound polarization charge) dz over the semiconductor (gate "
   "side of the balance)",
   dims=("bias",), flat="gate_charge")
_s("capacitance", "F/cm2", "capacitance",
   "C = dQ/dV by numpy.gradient of the converged gate charge over the bias points", dims=("bias",),
   flat="capacitance")
SWEEP.group("profile", "profiles per bias point, (bias, z)")
_s("profile/potential", "V", "electrostatic potential", "electrostatic potential, (bias, node)",
   dims=("bias", "z"), when="every point on the same mesh", flat="potential")
_s("profile/conduction_band", "eV", "conduction band edge",
   "Gamma conduction band edge relative to EF, (bias, node)", dims=("bias", "z"),
   when="every point on the same mesh", flat="conduction_band")
SWEEP.group("analysis", "figures of the sweep (README, Design recipes: gate sweep)")
_s("analysis/threshold_extrapolated", "V", "extrapolated threshold",
   "bias where the straight line through the steepest linear window of channel n_s(V) reaches zero",
   flat="threshold_extrapolated")
_s("analysis/linear_window", "V", "linear window", "bias range of the window used for the extrapolation",
   dims=("end",), flat="linear_window")
_s("analysis/linear_slope", "cm-2/V", "charge-control slope", "dn_s/dV of the channel in that window",
   flat="linear_slope")
_s("analysis/threshold_crossing", "V", "threshold crossing",
   "bias where channel n_s falls below threshold_cm2, interpolated in log10(n_s)", flat="threshold_crossing")
_s("analysis/threshold_cm2", "cm-2", "threshold density", "user threshold for threshold_crossing",
   flat="threshold_cm2")
_s("analysis/parallel_onset", "V", "parallel-conduction onset",
   "lowest bias above which doping-layer electrons exceed fraction * channel n_s at every higher point, "
   "interpolated", flat="parallel_onset")
_s("analysis/parallel_fraction", "1", "parallel-conduction fraction",
   "fraction of the channel n_s for parallel_onset", flat="parallel_fraction")
_s("analysis/gate_channel_distance", "nm", "gate-to-channel distance",
   "capacitive gate-to-channel distance d = eps_b * integral dz/eps(z)", flat="gate_channel_distance")
_s("analysis/delta_d", "nm", "charge-control offset",
   "charge-control offset dd = eps_b/(q dn_s/dV) - d (Delagebeaudeuf and Linh 1982)", flat="delta_d")
_s("analysis/linear_capacitance", "F/cm2", "linear-region capacitance", "q dn_s/dV in the linear window",
   flat="linear_capacitance")


# --------------------------------------------------------------------------- the study table (table.h5)

TABLE = Layout("selfcon.batch_table", 1, "study table (selfcon batch: table.h5)")
_t = TABLE.declare

TABLE.group("table", "one row per job of the study (retired jobs left out)")
_t("table/<varied path>", None, "varied deck path",
   "the deck path's value in the job; units: the path's unit in the deck reference", dims=("job",))
_t("table/status", "", "job status", "queued | running | done | not_converged | failed", dims=("job",))
_t("table/attempts", "1", "attempts", "attempts made", dims=("job",))
_t("table/converged", "1", "converged", "1 converged, 0 not, -1 no result", dims=("job",))
_t("table/iterations", "1", "iterations", "self-consistent iterations (-1: no result)", dims=("job",))
#: the summary figures of each job (selfcon.batch.runner.summarize computes them), in column order
TABLE_SUMMARY = (
    ("electron_sheet_density_cm2", "cm-2", "electron sheet density", "electrons per area in the whole stack"),
    ("hole_sheet_density_cm2", "cm-2", "hole sheet density", "holes per area in the whole stack"),
    ("channel_density_cm2", "cm-2", "main-channel sheet density",
     "sheet density of the main channel (the first [[channel]] of the deck, else the channel holding most "
     "carriers of the majority kind, outside the layers doped for them when there is one)"),
    ("E0_eV", "eV", "E0", "ground subband energy of the main channel, relative to EF (electron energy scale)"),
    ("E1_eV", "eV", "E1", "second subband energy of the main channel, relative to EF (electron energy scale)"),
    ("E1_minus_E0_eV", "eV", "E1 - E0", "subband spacing E1 - E0 of the main channel's own subbands"),
    ("E0_minus_EF_eV", "eV", "E0 - EF",
     "ground subband of the main channel relative to EF, in the carrier's own sense (negative: occupied)"),
    ("hole_E0_eV", "eV", "hole E0", "highest hole subband energy (electron energy), relative to EF"),
    ("residual_V", "V", "residual", "last max |dphi| of the self-consistent loop"),
    ("warnings", "1", "design warnings", "number of design warnings of the solve (see the job's result file)"),
)
for _name, _units, _long, _desc in TABLE_SUMMARY:
    _t(f"table/{_name}", _units, _long, _desc, dims=("job",))
_t("table/seconds", "s", "worker time", "time in the worker: the solve and building its result file",
   dims=("job",))
_t("table/warm_start", "1", "warm start", "1 if started from a neighbour's potential", dims=("job",))
_t("table/start", "", "start", "the start the result came from: extrapolated (secant through two neighbours), "
   "neighbour (the nearest one's potential) or cold; a continuation job falls back in that order "
   "until one converges", dims=("job",))
_t("table/result", "", "result file", "result file, relative to the folder", dims=("job",))
_t("table/message", "", "message", "solver message or error text (first line)", dims=("job",))

LAYOUTS = (RESULT, SWEEP, TABLE)
