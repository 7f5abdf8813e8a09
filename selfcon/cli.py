"""The ``selfcon`` command line (README.md, "Command line").

    selfcon run DECK [-o OUT.h5] [--set PATH=VALUE]... [--plot FIG] [--json] [--quiet] [--force]
    selfcon check DECK [--set PATH=VALUE]... [--json]
    selfcon show RESULT.h5 [--json]
    selfcon plot RESULT.h5 -o FIG [--size WxH | --width-px W --height-px H] [--depth A:B|full] [--force]
    selfcon export RESULT.h5 --csv DIR [--force]
    selfcon materials [NAME] [--x X] [--temperature T] [--json]

Exit codes (:data:`EXIT_CODES`, the table of README and ``--help``): 0 converged / ok,
2 bad input (one line ``selfcon: error: ...`` on stderr, no traceback), 3 not
converged (result still written, converged = false), 4 the environment failed
(disk full, permissions, corrupt queue, scheduler: one line ``selfcon: error: ...``
saying what and where), 1 internal error (set SELFCON_DEBUG=1 for the traceback).
A closed stdout (``selfcon show r.h5 | head``) ends the command quietly with 0.

Other packages add subcommands through :data:`EXTRA_COMMANDS`: each module
listed there has ``register(subparsers)`` adding parsers with
``set_defaults(func=handler)``, ``handler(args) -> int``.
"""
from __future__ import annotations

import argparse
import errno
import importlib
import json
import os
import sys
import traceback
from pathlib import Path

from selfcon.errors import (EXIT_ENVIRONMENT, EXIT_INPUT, EXIT_INTERNAL, EXIT_INTERRUPTED,
                            EXIT_NOT_CONVERGED, EXIT_OK, SelfconEnvironmentError, ResultFileError,
                            SelfconInputError, os_reason)

#: modules whose ``register(subparsers)`` adds subcommands
EXTRA_COMMANDS = ("selfcon.batch.commands", "selfcon.design.commands")

#: (code, meaning): the exit-code table of ``selfcon --help`` and README
EXIT_CODES = (
    (EXIT_OK, "converged / command succeeded"),
    (EXIT_INTERNAL, "internal error (a bug); SELFCON_DEBUG=1 shows the traceback"),
    (EXIT_INPUT, "bad input: deck, study, option, output path, or a result file that is damaged "
                 "or not selfcon's"),
    (EXIT_NOT_CONVERGED, "not converged, or a result failed a sanity check (files still written, "
                         "converged = false)"),
    (EXIT_ENVIRONMENT, "environment failure: disk full, permissions, corrupt queue, scheduler lost "
                       "or unreachable, worker-version mismatch"),
    (EXIT_INTERRUPTED, "interrupted (batch: rerun to continue)"),
)


class _Parser(argparse.ArgumentParser):
    """argparse with usage errors on one line and exit code 2 (argparse's own)."""

    def error(self, message):
        self.print_usage(sys.stderr)
        self.exit(EXIT_INPUT, f"selfcon: error: {message}\n")


def _console(stderr=False):
    from rich.console import Console

    class _Console(Console):
        def on_broken_pipe(self):        # rich would exit 1; a closed stdout is no failure (main: 0)
            self.quiet = True
            raise BrokenPipeError(errno.EPIPE, "broken pipe")

    stream = sys.stderr if stderr else sys.stdout
    kw = {}
    if not stream.isatty():
        kw["width"] = 110        # tables do not wrap in logs; no colour codes (rich: not a terminal)
    return _Console(file=stream, highlight=False, **kw)


def _require_file(path: Path, what: str):
    if not path.exists():
        raise SelfconInputError(f"no such {what}", file=str(path))
    if path.is_dir():
        raise SelfconInputError(f"is a folder, expected a {what}", file=str(path))


# --------------------------------------------------------------------------- progress

class SolveProgress:
    """The ``progress(record)`` callback of ``selfcon run`` on the one progress display
    (selfcon.output.progress): on a terminal a bar of the residual's log10 progress towards
    the tolerance, else one line per iteration; nothing with ``--quiet``."""

    def __init__(self, quiet: bool = False):
        from selfcon.output.progress import ProgressDisplay, progress_mode
        self.display = ProgressDisplay(progress_mode(quiet), label="solving", transient=True)
        self._first = None

    def __enter__(self):
        self.display.start(1.0, "initial guess")
        return self

    def __exit__(self, *exc):
        self.display.stop()
        return False

    def __call__(self, record) -> None:
        """Show one iteration (a selfcon.solver.loop.IterationRecord)."""
        text = (f"iteration {record.iteration}/{record.max_iterations}  "
                f"max |dphi| = {record.residual:.2e} V")
        self.display.update(self.fraction(record), text, line=text)

    def fraction(self, record) -> float:
        """log(first / residual) / log(first / tolerance), clipped to [0, 1]."""
        import math
        res, tol = record.residual, record.tolerance
        if self._first is None and res > 0 and math.isfinite(res):
            self._first = res
        if self._first and tol and res > 0 and math.isfinite(res) and self._first > tol:
            return min(1.0, max(0.0, math.log(self._first / res) / math.log(self._first / tol)))
        return 0.0


# --------------------------------------------------------------------------- commands

def _default_result_path(deck_path: Path) -> Path:
    return deck_path.with_suffix(".h5")


def _max_nodes(args) -> float:
    """``--max-nodes``, checked (exit 2 below 2)."""
    if not (args.max_nodes >= 2):
        raise SelfconInputError(f"must be >= 2, got {args.max_nodes:g}", key="--max-nodes")
    return args.max_nodes


def _add_max_nodes(p) -> None:
    from selfcon.model.mesh import MAX_NODES
    p.add_argument("--max-nodes", type=float, default=float(MAX_NODES), metavar="N",
                   help=f"refuse a mesh of more nodes, counted before any work (default {MAX_NODES:.0e}); "
                        "the message gives the count and the memory it would take")


def cmd_run(args) -> int:
    from selfcon import api
    from selfcon.output import report
    from selfcon.output.files import check_outputs, output
    deck_path = Path(args.deck)
    _require_file(deck_path, "deck file")
    out = Path(args.output) if args.output else _default_result_path(deck_path)
    # every output is checked before the solve: nothing existing is replaced unasked
    check_outputs([output(args.output if args.output else out, "result", "-o" if args.output else
                          "-o (default: beside the deck)"),
                   output(args.plot, "figure", "--plot") if args.plot else None],
                  inputs=[(deck_path, "the deck")], force=args.force, error=ResultFileError)
    from selfcon.solver.threads import configure
    configure(args.threads)
    deck = api.load_deck(deck_path, overrides=tuple(args.set or ()))
    structure = api.build_structure(deck, max_nodes=_max_nodes(args))     # the mesh guard, before any work
    with SolveProgress(quiet=args.quiet) as progress:
        result = api.solve(deck, progress=progress, structure=structure)
    result.save(out, force=args.force)
    if args.plot:
        from selfcon.output.plot import plot_result
        plot_result(result, args.plot, force=args.force)
    fig = report.summary_figures(result, output=str(out))
    if args.plot:
        fig["plot"] = str(args.plot)
    if args.json:
        print(report.to_json(fig))
    elif args.quiet:
        print("\n".join(report.plain_summary(fig)))
    else:
        report.print_summary(fig, _console())
        if args.plot:
            print(f"band diagram written to {args.plot}")
    if not result.converged:
        print(f"selfcon: not converged: {result.message}; result written to {out} (converged = false)",
              file=sys.stderr)
        return EXIT_NOT_CONVERGED
    return EXIT_OK


def _fmt(v, unit=""):
    from selfcon.output.numbers import fmt
    if v is None:
        return "–"
    if isinstance(v, float) and (abs(v) >= 1e5 or (0 < abs(v) < 1e-3)):
        return fmt(v, "volume" if unit == "" else "plain") + unit
    return fmt(v, "plain") + unit if isinstance(v, (int, float)) else str(v)


def check_figures(deck, structure) -> dict:
    """What `selfcon check` reports: stack, contacts, mesh statistics, quantum regions, strain
    (each layer's strain and critical-thickness margin), non-type-I interfaces and, with
    multiband holes, the layers of the quantum regions whose bulk hole band curves the wrong
    way (selfcon.output.diagnostics.kp_curvature_findings)."""
    import numpy as np
    from selfcon.output.diagnostics import interface_alignments, kp_curvature_findings, kp_curvature_text
    sm = structure.strain
    per = {L.index: L for L in sm.layers} if sm is not None else {}
    layers = []
    for L in structure.layers:
        row = {"index": L.index, "name": L.name, "material": L.material, "x_top": L.x_top,
               "x_bottom": L.x_bottom, "top_nm": L.top, "bottom_nm": L.bottom,
               "thickness_nm": L.bottom - L.top, "donors_cm3": L.donors, "acceptors_cm3": L.acceptors,
               "sheet_donors_cm2": L.sheet_donors, "sheet_acceptors_cm2": L.sheet_acceptors}
        if L.y_top is not None:
            row.update(y_top=L.y_top, y_bottom=L.y_bottom)
        if L.lattice_matched is not None:
            row["lattice_matched"] = L.lattice_matched
        ls = per.get(L.index)
        if sm is not None and sm.strained and ls is not None:
            row.update(relaxed=ls.relaxed, strain_xx=ls.eps_xx, strain_zz=ls.eps_zz,
                       lattice_inplane_nm=ls.lattice_inplane, lattice_own_nm=ls.lattice_own,
                       critical_thickness_nm=ls.critical_thickness,
                       thickness_over_critical=(ls.thickness / ls.critical_thickness
                                                if ls.strained else 0.0))
        layers.append(row)
    strain = {"mode": sm.mode if sm is not None else "unstrained",
              "reference": sm.reference if sm is not None else "unstrained",
              "crystal": getattr(sm, "crystal", "zincblende"),
              "criterion": getattr(sm, "criterion", "Matthews-Blakeslee"),
              "lattice_reference_nm": sm.a_reference if sm is not None else None,
              "runs": [{"first": structure.layers[a].name, "last": structure.layers[b].name,
                        "thickness_nm": hh, "critical_thickness_nm": hc, "mean_strain_xx": e}
                       for a, b, hh, hc, e in (sm.windows if sm is not None else ())]}
    interfaces = [dict(it, upper=structure.layers[it["upper"]].name,
                       lower=structure.layers[it["lower"]].name,
                       electrons=structure.layers[it["electrons"]].name,
                       holes=structure.layers[it["holes"]].name)
                  for it in interface_alignments(structure) if it["kind"] != "type I"]
    polarization = None
    if getattr(structure, "crystal", "zincblende") == "wurtzite":
        from selfcon.constants import C_M2_PER_NM2, CM2_PER_NM2
        pz = np.asarray(structure.cell["polarization"])
        cl = np.asarray(structure.cell_layer)
        for row in layers:
            sel = cl == row["index"]
            if sel.any():
                row["polarization_C_m2"] = float(np.mean(pz[sel]))
        polarization = {
            "polarity": structure.polarity, "factor": structure.polarization_factor,
            "interfaces": [{"upper": structure.layers[i["upper"]].name,
                            "lower": structure.layers[i["lower"]].name, "z_nm": i["z_nm"],
                            "sigma_cm2": i["sigma_nm2"] * CM2_PER_NM2,
                            "sigma_C_m2": i["sigma_nm2"] * C_M2_PER_NM2}
                           for i in structure.interfaces()]}
    z = np.asarray(structure.z)
    h = np.diff(z)
    regions = [{"top_nm": float(a), "bottom_nm": float(b), "nodes": int(i1 - i0 + 1)}
               for (a, b), (i0, i1) in zip(structure.regions_nm, structure.regions)]
    contacts = {}
    for side in ("surface", "substrate"):
        c = getattr(structure, side)
        contacts[side] = {"contact": c.kind, "barrier_eV": c.barrier, "bias_V": c.bias}
    holes = (any(b in structure.carriers for b in ("heavy_hole", "light_hole"))
             and structure.hole_model != "parabolic")
    kp_bands = [{"layers": f["layers"], "material": f["material"], "gammas": list(f["gammas"]),
                 "model": f["model"], "curvatures": [c._asdict() for c in f["bad"]],
                 "text": kp_curvature_text(f, before_solve=True)}
                for f in (kp_curvature_findings(structure) if holes else [])]
    from selfcon.output.report import jsonable
    return jsonable({"title": deck.title, "temperature_K": deck.temperature, "file": deck.path,
                   "overrides": [f"{k}={v}" for k, v in getattr(deck, "overrides", ())],
                   "carriers": list(structure.carriers), "layers": layers, "contacts": contacts,
                   "mesh": {"nodes": int(z.size), "min_step_nm": float(h.min()) if h.size else None,
                            "max_step_nm": float(h.max()) if h.size else None,
                            "thickness_nm": float(z[-1] - z[0]) if z.size else 0.0},
                   "quantum_regions": regions, "strain": strain, "interfaces": interfaces,
                   "polarization": polarization, "hole_model": structure.hole_model,
                   "kp_hole_bands": kp_bands,
                   "exchange_correlation": structure.exchange_correlation,
                   "nonparabolicity": bool(structure.nonparabolicity)})


def cmd_check(args) -> int:
    from selfcon import api
    deck_path = Path(args.deck)
    _require_file(deck_path, "deck file")
    deck = api.load_deck(deck_path, overrides=tuple(args.set or ()))
    structure = api.build_structure(deck, max_nodes=_max_nodes(args))
    fig = check_figures(deck, structure)
    from selfcon.output.numbers import fmt
    if args.json:
        print(json.dumps(fig, indent=2, ensure_ascii=False))
        return EXIT_OK
    from rich.table import Table
    console = _console()
    from selfcon.output.heading import override_notes
    notes = override_notes(deck)
    title = f"deck title: {fig['title']}" if notes else fig["title"]
    console.print(f"[bold]{title}[/bold]  T = {fmt(fig['temperature_K'], 'K')} K  ({deck_path}: valid)")
    if notes:
        console.print("set: " + "; ".join(notes))
    strained = fig["strain"]["mode"] != "unstrained"
    has_y = any("y_top" in L for L in fig["layers"])
    t = Table(title="Stack (top to bottom)", title_justify="left")
    cols = [("#", "right"), ("layer", "left"), ("material", "left"), ("x", "right")]
    if has_y:
        cols.append(("y", "right"))
    cols += [("top–bottom (nm)", "right"), ("thickness (nm)", "right"), ("Nd (cm⁻³)", "right"),
             ("Na (cm⁻³)", "right"), ("sheet Nd (cm⁻²)", "right"), ("sheet Na (cm⁻²)", "right")]
    for col, just in cols:
        t.add_column(col, justify=just)

    def comp(a, b):
        if a is None:
            return "–"
        return f"{a:.4g}→{b:.4g}" if b is not None and b != a else f"{a:.4g}"

    for L in fig["layers"]:
        row = [str(L["index"]), L["name"], L["material"], comp(L["x_top"], L["x_bottom"])]
        if L.get("lattice_matched"):
            row[3] += f" (≡{L['lattice_matched']})" if "y_top" not in L else ""
        if has_y:
            row.append(comp(L.get("y_top"), L.get("y_bottom")))
        row += [f"{L['top_nm']:g}–{L['bottom_nm']:g}", f"{L['thickness_nm']:g}", _fmt(L["donors_cm3"]),
                _fmt(L["acceptors_cm3"]), _fmt(L["sheet_donors_cm2"]), _fmt(L["sheet_acceptors_cm2"])]
        t.add_row(*row)
    console.print(t)
    sm = fig["strain"]
    if not strained:
        console.print("strain: unstrained (no \\[substrate] material or lattice_constant, no "
                      "relaxed layer): every layer at its own lattice constant")
    else:
        st = Table(title=f"Strain ({sm['reference']})", title_justify="left")
        for col in ("#", "layer", "a (nm)", "a_par (nm)", "ε_xx (%)", "ε_zz (%)", "h_c (nm)",
                    "h / h_c"):
            st.add_column(col, justify="left" if col == "layer" else "right")
        for L in fig["layers"]:
            hc = L.get("critical_thickness_nm")
            ratio = L.get("thickness_over_critical") or 0.0
            if L.get("relaxed"):
                tail = ["relaxed", "–", "–", "–"]
            else:
                tail = [f"{100 * L.get('strain_xx', 0.0):+.3f}", f"{100 * L.get('strain_zz', 0.0):+.3f}",
                        "∞" if hc is None else f"{hc:.1f}",
                        "–" if not ratio else f"{ratio:.2f}" + (" beyond" if ratio > 1 else "")]
            st.add_row(str(L["index"]), L["name"], f"{L.get('lattice_own_nm', float('nan')):.6f}",
                       f"{L.get('lattice_inplane_nm', float('nan')):.6f}", *tail)
        console.print(st)
        if sm.get("crystal") == "wurtzite":
            console.print("ε_xx = (a_par − a)/a in the c plane, ε_zz = −2 (C13/C33) ε_xx; h_c: "
                          "channel-cracking thickness of a layer under tension, K_Ic²/(Z σ²) "
                          "(Hutchinson–Suo; compressed layers: ∞, no criterion); h / h_c > 1: beyond it")
        else:
            console.print("ε_xx = (a_par − a)/a, ε_zz = −2 (C12/C11) ε_xx; h_c: Matthews–Blakeslee "
                          "critical thickness (h / h_c > 1: beyond it)")
        for r in sm["runs"]:
            hc = r["critical_thickness_nm"]
            over = hc is not None and r["thickness_nm"] > hc
            console.print(f"  strained run {r['first']}…{r['last']}: {r['thickness_nm']:g} nm at mean "
                          f"ε_xx {100 * r['mean_strain_xx']:+.3f} %, h_c {('∞' if hc is None else f'{hc:.1f}')} nm"
                          + (" ⚠ beyond it" if over else ""))
    pol = fig.get("polarization")
    if pol:
        pt = Table(title=f"Polarization ({pol['polarity']}-face, factor {pol['factor']:g}): bound sheets "
                         "σ = P_z(above) − P_z(below), P_z along +z (into the wafer)", title_justify="left")
        for col in ("interface", "z (nm)", "σ (cm⁻²)", "σ (C/m²)"):
            pt.add_column(col, justify="left" if col == "interface" else "right")
        for i in pol["interfaces"]:
            pt.add_row(f"{i['upper']}/{i['lower']}", f"{i['z_nm']:g}", fmt(i['sigma_cm2'], 'sheet', sign=True),
                       f"{i['sigma_C_m2']:+.5f}")
        console.print(pt)
        console.print("P_z per layer (C/m²): " + ", ".join(
            f"{L['name']} {L['polarization_C_m2']:+.5f}" for L in fig["layers"] if "polarization_C_m2" in L))
    for it in fig["interfaces"]:
        console.print(f"interface {it['upper']}/{it['lower']} at {it['z_nm']:g} nm: {it['kind']} "
                      f"(interface gap {1e3 * it['gap_eV']:.0f} meV; electrons in {it['electrons']}, "
                      f"holes in {it['holes']}): single-band model only rough here")
    if fig["kp_hole_bands"]:
        from rich.markup import escape
        for f in fig["kp_hole_bands"]:
            console.print("⚠ " + escape(f["text"]))
    for side, c in fig["contacts"].items():
        extra = "" if c["barrier_eV"] is None else f", barrier {c['barrier_eV']:g} eV"
        if c["contact"] == "schottky":
            extra += f", bias {c['bias_V']:g} V"
        console.print(f"{side}: {c['contact']}{extra}")
    m = fig["mesh"]
    console.print(f"mesh: {m['nodes']} nodes over {fmt(m['thickness_nm'], 'nm')} nm, step "
                  f"{fmt(m['min_step_nm'], 'nm')} to {fmt(m['max_step_nm'], 'nm')} nm")
    if fig["quantum_regions"]:
        for r in fig["quantum_regions"]:
            console.print(f"quantum region {r['top_nm']:g}–{r['bottom_nm']:g} nm: {r['nodes']} nodes")
    else:
        console.print("no quantum region: all carriers classical")
    console.print("carriers: " + ", ".join(fig["carriers"]))
    console.print("model: " + ("Hartree" if fig["exchange_correlation"] == "none" else
                               f"{fig['exchange_correlation']} exchange-correlation (Schrödinger only)")
                  + (", nonparabolic Γ electrons" if fig["nonparabolicity"] else
                     ", parabolic bands" if fig["hole_model"] == "parabolic" else ", parabolic Γ electrons")
                  + (f", {fig['hole_model']} multiband holes" if fig["hole_model"] != "parabolic" else ""))
    return EXIT_OK


def cmd_show(args) -> int:
    from selfcon.output import report
    from selfcon.output.result import load_result
    path = Path(args.result)
    result = load_result(path)
    fig = report.summary_figures(result, output=None)
    fig["file"] = str(path)
    if args.json:
        print(report.to_json(fig))
        return EXIT_OK
    if args.quiet:
        print("\n".join(report.plain_summary(fig)))
        return EXIT_OK
    console = _console()
    prov = result.provenance
    console.print(f"{path}: selfcon result, written by selfcon {prov.get('selfcon_version', '?')}"
                  + (f", deck hash {str(prov['deck_hash'])[:12]}" if prov.get("deck_hash") else ""))
    report.print_summary(fig, console)
    return EXIT_OK


def _parse_size(args):
    size = None
    if args.size:
        text = args.size.lower().replace("×", "x")
        parts = text.split("x")
        try:
            w, h = (int(p) for p in parts)
        except ValueError:
            raise SelfconInputError(f"bad size {args.size!r}", key="--size", allowed="WIDTHxHEIGHT in pixels, "
                                    "e.g. 1200x900") from None
        size = (w, h)
    if args.width_px is not None or args.height_px is not None:
        if size is not None:
            raise SelfconInputError("give either --size or --width-px/--height-px", key="--size")
        from selfcon.output.plot import DEFAULT_SIZE
        size = (args.width_px or DEFAULT_SIZE[0], args.height_px or DEFAULT_SIZE[1])
    if size is not None and not (50 <= size[0] <= 20000 and 50 <= size[1] <= 20000):
        raise SelfconInputError(f"figure size {size[0]}x{size[1]} px out of range", key="--size",
                                allowed="50 to 20000 px per side")
    return size


def _parse_depth(text):
    if text is None:
        return None
    if text.strip().lower() == "full":
        return "full"
    try:
        a, b = (float(p) for p in text.split(":"))
    except ValueError:
        raise SelfconInputError(f"bad depth range {text!r}", key="--depth",
                                allowed="TOP:BOTTOM in nm, e.g. 0:200, or full") from None
    if not b > a:
        raise SelfconInputError(f"bad depth range {text!r}: bottom must exceed top", key="--depth")
    return (a, b)


def cmd_plot(args) -> int:
    from selfcon.output.files import check_outputs, output
    from selfcon.output.plot import plot_result
    from selfcon.output.result import load_result
    out = Path(args.output)
    check_outputs([output(args.output, "figure", "-o")], inputs=[(args.result, "the result file")],
                  force=args.force)
    size = _parse_size(args)
    depth = _parse_depth(args.depth)
    result = load_result(args.result)
    plot_result(result, out, size=size, depth=depth, force=args.force)
    if not args.quiet:
        print(f"band diagram written to {out}")
    return EXIT_OK


def cmd_export(args) -> int:
    from selfcon.output.export import export_csv, tables
    from selfcon.output.files import check_outputs, output
    from selfcon.output.result import load_result
    check_outputs([output(args.csv, "folder", "--csv", files=tables(args.wavefunctions))],
                  inputs=[(args.result, "the result file")], force=args.force)
    result = load_result(args.result)
    paths = export_csv(result, args.csv, force=args.force, wavefunctions=args.wavefunctions)
    if not args.quiet:
        for p in paths:
            print(f"wrote {p}")
    return EXIT_OK


def cmd_materials(args) -> int:
    from selfcon.input import materials
    if args.name is None:
        names = list(materials.names())
        if args.json:
            print(json.dumps([{"name": n, "alloy": bool(materials.is_alloy(n))} for n in names], indent=2))
            return EXIT_OK
        from rich.table import Table
        t = Table(title="Material library", title_justify="left")
        t.add_column("name")
        t.add_column("kind")
        for n in names:
            k = materials.kind(n)
            t.add_row(n, {"ternary": "ternary (needs x)", "quaternary": "quaternary (needs x and y)"}
                      .get(k, k))
        console = _console()
        console.print(t)
        console.print("selfcon materials NAME lists every value with its source")
        return EXIT_OK
    kw = {}
    if args.x is not None:
        kw["x"] = args.x
    if getattr(args, "y", None) is not None:
        kw["y"] = args.y
    if args.temperature is not None:
        kw["temperature"] = args.temperature
    if getattr(args, "on", None) is not None:
        return _materials_on(args, kw)
    rows = materials.describe(args.name, **kw)
    if args.json:
        from selfcon.output.report import jsonable
        print(json.dumps(jsonable({"name": args.name, **kw, "parameters": list(rows)}), indent=2,
                         ensure_ascii=False))
        return EXIT_OK
    title = args.name + "".join(f", {k} = {v:g}" for k, v in kw.items())
    console = _console()
    for line in material_table(title, rows, console):
        console.print(line)
    return EXIT_OK


def material_rows(rows) -> tuple[list[tuple[str, str, str, int]], list[str]]:
    """The compact view of ``materials NAME``: (parameter, value, unit, footnote) rows and the
    footnotes (each distinct source once). The values computed at the chosen composition and
    temperature come first; interpolation rules that share a value and a source are one row."""
    from selfcon.output.numbers import fmt
    notes: list[str] = []

    def note(source) -> int:
        text = " ".join(str(source or "").split())
        if text not in notes:
            notes.append(text)
        return notes.index(text) + 1

    computed = [r for r in rows if str(r.get("source", "")).startswith("computed")]
    rest = [r for r in rows if r not in computed]
    out, rules = [], {}
    for r in computed + rest:
        name, v = str(r["parameter"]), r["value"]
        if name.startswith("rule."):
            rules.setdefault((str(v), str(r.get("source") or "")), []).append(name[5:])
            continue
        value = fmt(v, "plain") if isinstance(v, (int, float)) and not isinstance(v, bool) else str(v)
        out.append((name, value, str(r.get("unit") or "").replace("1", "") if r.get("unit") == "1" else
                    str(r.get("unit") or ""), note(r.get("source"))))
    for (value, source), names in rules.items():
        out.append(("rule: " + ", ".join(names), value, "", note(source)))
    return out, notes


def material_table(title, rows, console=None) -> list:
    """``materials NAME`` as one rich table (value, unit, footnote) and its numbered sources."""
    from rich.table import Table
    table_rows, notes = material_rows(rows)
    t = Table(title=title, title_justify="left")
    t.add_column("parameter")
    t.add_column("value", justify="right")
    t.add_column("unit")
    t.add_column("src", justify="right")
    for name, value, unit, n in table_rows:
        t.add_row(name, value, unit, f"[{n}]")
    return [t, "sources:"] + [f"[{i}] {text}" for i, text in enumerate(notes, 1)]


def _parse_on(text):
    """``--on`` value: a lattice constant in nm, or NAME, NAME:X or NAME:X:Y."""
    try:
        return None, None, None, float(text)
    except ValueError:
        pass
    parts = text.split(":")
    if not parts[0] or len(parts) > 3:
        raise SelfconInputError(f"bad substrate {text!r}", key="--on",
                                allowed="NAME, NAME:X, NAME:X:Y or a lattice constant in nm")
    try:
        nums = [float(v) for v in parts[1:]]
    except ValueError:
        raise SelfconInputError(f"bad composition in {text!r}", key="--on",
                                allowed="NAME:X or NAME:X:Y with numbers in [0, 1]") from None
    return parts[0], (nums[0] if nums else None), (nums[1] if len(nums) > 1 else None), None


def strained_figures(name, x=None, y=None, temperature=300.0, on="GaAs") -> dict:
    """What `selfcon materials NAME --on SUBSTRATE` shows: the band edges of bulk ``name``
    unstrained and grown pseudomorphically on (001) of the substrate, and its critical
    thickness there (selfcon.model.strain)."""
    import numpy as np
    from selfcon.errors import MaterialError
    from selfcon.input import materials
    from selfcon.model import strain as S
    T = float(temperature)
    sub, sx, sy, a_given = _parse_on(on) if isinstance(on, str) else (None, None, None, float(on))

    def params(mat, mx, my, key):
        try:
            return materials.cell_parameters(mat, np.array([np.nan if mx is None else mx]), T,
                                             needs={"strain"},
                                             y=None if my is None else np.array([my]))
        except MaterialError as err:
            raise MaterialError(err.message, key=key if err.key in (None, "x", "y", "material") else err.key,
                                allowed=err.allowed) from None

    p = params(name, x, y, "NAME")
    if a_given is not None:
        a_par, label = a_given, f"a = {a_given:g} nm"
    else:
        a_par = float(params(sub, sx, sy, "--on")["lattice"][0])
        label = sub + "".join(f" {k} = {v:g}" for k, v in (("x", sx), ("y", sy)) if v is not None)
    if materials.crystal(name) != materials.crystal(sub) and sub is not None:
        raise MaterialError(f"{name} is {materials.crystal(name)} and {sub} is "
                            f"{materials.crystal(sub)}: a substrate of the same crystal is needed",
                            key="--on")
    if materials.crystal(name) == "wurtzite":
        return _wurtzite_on(name, x, y, T, p, a_par, label)
    e = S.bulk_strained_edges(p, np.array([a_par]))
    eps = float(e["eps_xx"][0])
    nu = float(S.poisson_ratio_001(p["c11"][0], p["c12"][0]))
    a0 = float(p["lattice"][0])
    rows = []

    def add(q, unit, before, after, note=""):
        rows.append({"quantity": q, "unit": unit, "unstrained": before, "strained": after, "note": note})

    add("lattice constant", "nm", a0, a_par, "in-plane a_par on the substrate")
    add("eps_xx", "1", 0.0, eps, "(a_par - a)/a")
    add("eps_zz", "1", 0.0, float(e["eps_zz"][0]), "-2 (C12/C11) eps_xx")
    for key, q in (("ec_gamma", "Gamma conduction edge"), ("ev_hh", "heavy-hole edge"),
                   ("ev_lh", "light-hole edge")):
        add(q, "eV", float(p[key][0]), float(e[key][0]), "common scale (InSb VBM = 0)")
    add("split-off edge", "eV", float(p["vbo"][0] - p["delta_so"][0]), float(e["ev_so"][0]),
        "light hole / split-off coupled by the shear strain")
    gx = float(p["g_x"][0])                       # 3 zincblende X valleys, 6 Si/Ge Delta valleys
    name_x = "X/Δ" if gx > 3.5 else "X"
    add(f"{name_x} edge, valleys along z" if gx > 3.5 else "X edge, valley along z", "eV", float(p["ec_x"][0]), float(e["ec_x_z"][0]),
        f"{gx / 3:g} valley" + ("s" if gx / 3 != 1 else "") + " (x2_electron)")
    add(f"{name_x} edge, valleys in plane", "eV", float(p["ec_x"][0]), float(e["ec_x_xy"][0]),
        f"{2 * gx / 3:g} valleys (x4_electron)")
    add("L edge", "eV", float(p["ec_l"][0]), float(e["ec_l"][0]), "4 valleys, not split on (001)")
    top0, top1 = float(p["vbo"][0]), float(max(e["ev_hh"][0], e["ev_lh"][0]))
    add("Gamma gap", "eV", float(p["ec_gamma"][0]) - top0, float(e["ec_gamma"][0]) - top1,
        "to the top valence edge")
    add("heavy - light hole", "eV", 0.0, float(e["ev_hh"][0] - e["ev_lh"][0]),
        "> 0: heavy hole on top (compressive)")
    hc = {"buried": S.matthews_blakeslee(eps, a0, nu, capped=True),
          "at the surface": S.matthews_blakeslee(eps, a0, nu, capped=False)}
    from selfcon.output.report import jsonable
    return jsonable({"name": name, "x": x, "y": y, "temperature_K": T, "substrate": label,
                   "lattice_inplane_nm": a_par, "rows": rows,
                   "critical_thickness_nm": hc,
                   "sources": "strain: Van de Walle, Phys. Rev. B 39, 1871 (1989) deformation "
                              "potentials (selfcon.model.strain); critical thickness: Matthews and "
                              "Blakeslee, J. Cryst. Growth 27, 118 (1974), force balance"})


def _wurtzite_on(name, x, y, T, p, a_par, label) -> dict:
    """strained_figures of a wurtzite material on the c plane of ``a_par``: edges of the three
    valence bands, hole masses, polarization (metal face, along [0001]) and the cracking
    thickness (selfcon.model.strain, selfcon.model.polarization)."""
    import numpy as np
    from selfcon.model import polarization as PZ
    from selfcon.model import strain as S
    e = S.bulk_strained_edges(p, np.array([a_par]))
    eps = float(e["eps_xx"][0])
    v = lambda d, k: float(d[k][0])  # noqa: E731
    rows = []

    def add(q, unit, before, after, note=""):
        rows.append({"quantity": q, "unit": unit, "unstrained": before, "strained": after, "note": note})

    add("lattice constant a", "nm", v(p, "lattice"), a_par, "in-plane a_par on the substrate")
    add("eps_xx", "1", 0.0, eps, "(a_par - a)/a in the c plane")
    add("eps_zz", "1", 0.0, v(e, "eps_zz"), "-2 (C13/C33) eps_xx")
    for key, q in (("ec_gamma", "Gamma conduction edge"), ("ev_hh", "heavy-hole edge (A)"),
                   ("ev_lh", "light-hole edge (B)"), ("ev_ch", "split-off hole edge (C)")):
        add(q, "eV", v(p, key), v(e, key), "common scale (InSb VBM = 0)")
    top0, top1 = max(v(p, "ev_hh"), v(p, "ev_lh")), max(v(e, "ev_hh"), v(e, "ev_lh"))
    add("Gamma gap", "eV", v(p, "ec_gamma") - top0, v(e, "ec_gamma") - top1, "to the top valence edge")
    for b, q in (("hh", "heavy"), ("lh", "light"), ("ch", "split-off")):
        add(f"{q} hole mass along c", "m0", v(p, f"m_{b}_z"), v(e, f"m_{b}_z"), "Chuang-Chang k = 0")
        add(f"{q} hole mass in the c plane", "m0", v(p, f"m_{b}_par"), v(e, f"m_{b}_par"), "")
    ppz = float(PZ.piezoelectric(eps, p["e31"][0], p["e33"][0], p["c13"][0], p["c33"][0]))
    add("P_sp along [0001]", "C/m^2", v(p, "psp"), v(p, "psp"), "spontaneous")
    add("P_pz along [0001]", "C/m^2", 0.0, ppz, "2 eps_xx (e31 - e33 C13/C33)")
    stress = float(S.biaxial_stress_c_plane(eps, p["c11"][0], p["c12"][0], p["c13"][0], p["c33"][0]))
    add("biaxial stress", "GPa", 0.0, stress, "> 0: tension")
    hc = S.channel_cracking_thickness(stress)
    from selfcon.output.report import jsonable
    return jsonable({"name": name, "x": x, "y": y, "temperature_K": T, "substrate": label,
                     "crystal": "wurtzite", "lattice_inplane_nm": a_par, "rows": rows,
                     "critical_thickness_nm": {"channel cracking": hc},
                     "sources": "strain: Chuang and Chang, Phys. Rev. B 54, 2491 (1996) with the "
                                "potentials of Vurgaftman and Meyer, J. Appl. Phys. 94, 3675 (2003) "
                                "(selfcon.model.strain); polarization: Ambacher et al., J. Phys.: "
                                "Condens. Matter 14, 3399 (2002); critical thickness: channel "
                                "cracking, Hutchinson and Suo, Adv. Appl. Mech. 29, 63 (1992)"})


def _materials_on(args, kw) -> int:
    T = kw.get("temperature", 300.0)
    fig = strained_figures(args.name, kw.get("x"), kw.get("y"), T, args.on)
    if args.json:
        print(json.dumps(fig, indent=2, ensure_ascii=False))
        return EXIT_OK
    from rich.table import Table
    comp = "".join(f", {k} = {fig[k]:g}" for k in ("x", "y") if fig[k] is not None)
    plane = "c plane" if fig.get("crystal") == "wurtzite" else "(001)"
    t = Table(title=f"{args.name}{comp} on {fig['substrate']} {plane}, T = {T:g} K", title_justify="left")
    for col, just in (("quantity", "left"), ("unstrained", "right"), ("strained", "right"),
                      ("unit", "left"), ("", "left")):
        t.add_column(col, justify=just)
    for r in fig["rows"]:
        fmt = ((lambda v: f"{100 * v:+.3f} %") if r["unit"] == "1" else
               (lambda v: f"{v:+.5f}") if r["unit"] == "C/m^2" else (lambda v: f"{v:.5f}"))
        t.add_row(r["quantity"], fmt(r["unstrained"]), fmt(r["strained"]),
                  "" if r["unit"] == "1" else r["unit"], r["note"])
    console = _console()
    console.print(t)
    hc = fig["critical_thickness_nm"]
    show = lambda v: "∞" if v is None else f"{v:.1f} nm"  # noqa: E731
    if "channel cracking" in hc:
        console.print(f"critical thickness for channel cracking: {show(hc['channel cracking'])}"
                      + (" (under compression: no cracking)" if hc["channel cracking"] is None else ""))
    else:
        console.print(f"Matthews–Blakeslee critical thickness: {show(hc['buried'])} buried under a cap, "
                      f"{show(hc['at the surface'])} at the surface")
    console.print(fig["sources"])
    return EXIT_OK


# --------------------------------------------------------------------------- parser

def build_parser() -> argparse.ArgumentParser:
    from selfcon.version import __version__
    p = _Parser(prog="selfcon", description="Self-consistent Schrödinger–Poisson solutions for layered "
                "semiconductor structures.",
                formatter_class=argparse.RawDescriptionHelpFormatter,
                epilog="exit codes:\n" + "\n".join(f"  {c:>3}  {m}" for c, m in EXIT_CODES))
    p.add_argument("--version", action="version", version=f"selfcon {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser, help="what to do")
    sub.required = True

    r = sub.add_parser("run", help="solve one deck and write the result file",
                       description="Solve one deck self-consistently, write the HDF5 result atomically and "
                                   "print a summary. Exit 3 when the solve does not converge (the result is "
                                   "still written, marked converged = false).")
    r.add_argument("deck", metavar="DECK", help="deck file (TOML)")
    r.add_argument("-o", "--output", metavar="OUT.h5",
                   help="result file (default: beside the deck, same stem, .h5: inputs/a.toml -> inputs/a.h5)")
    r.add_argument("--set", action="append", metavar="PATH=VALUE", default=[],
                   help="override a deck value, repeatable: temperature=77, surface.bias=-0.2, "
                        "layer.spacer.thickness=15, layer.2.x=0.25")
    r.add_argument("--plot", metavar="FIG", help="also draw the band diagram (.png, .svg or .pdf)")
    r.add_argument("--json", action="store_true", help="print the summary as one JSON object and nothing else")
    r.add_argument("--quiet", action="store_true", help="no progress display; a few plain summary lines")
    r.add_argument("--force", action="store_true",
                   help="overwrite an existing result file and figure (never the deck itself)")
    _add_max_nodes(r)
    from selfcon.solver.threads import add_argument as add_threads
    add_threads(r)
    r.set_defaults(func=cmd_run)

    c = sub.add_parser("check", help="validate a deck and show the stack and mesh without solving")
    c.add_argument("deck", metavar="DECK", help="deck file (TOML)")
    c.add_argument("--set", action="append", metavar="PATH=VALUE", default=[], help="as for run")
    c.add_argument("--json", action="store_true", help="print the stack and mesh as JSON")
    _add_max_nodes(c)
    c.set_defaults(func=cmd_check)

    s = sub.add_parser("show", help="summarise a result file")
    s.add_argument("result", metavar="RESULT.h5", help="result file written by selfcon run")
    s.add_argument("--json", action="store_true", help="print the summary as one JSON object")
    s.add_argument("--quiet", action="store_true", help="a few plain summary lines instead of tables")
    s.set_defaults(func=cmd_show)

    pl = sub.add_parser("plot", help="draw the band diagram of a result file")
    pl.add_argument("result", metavar="RESULT.h5", help="result file written by selfcon run")
    pl.add_argument("-o", "--output", metavar="FIG", required=True, help="figure file: .png, .svg or .pdf")
    pl.add_argument("--size", metavar="WxH", help="figure size in pixels (default 1200x900)")
    pl.add_argument("--width-px", type=int, metavar="W", help="figure width in pixels")
    pl.add_argument("--height-px", type=int, metavar="H", help="figure height in pixels")
    pl.add_argument("--depth", metavar="TOP:BOTTOM",
                    help="depth range in nm, or 'full' (default: the whole stack, or up to a little below "
                         "the quantum regions when a thick classical substrate layer would crowd them)")
    pl.add_argument("--quiet", action="store_true", help="print nothing")
    pl.add_argument("--force", action="store_true", help="overwrite an existing figure")
    pl.set_defaults(func=cmd_plot)

    e = sub.add_parser("export", help="write a result's profiles and subbands as CSV tables")
    e.add_argument("result", metavar="RESULT.h5", help="result file written by selfcon run")
    e.add_argument("--csv", metavar="DIR", required=True,
                   help="folder for profile.csv, subbands.csv, channels.csv and transitions.csv (created if missing)")
    e.add_argument("--wavefunctions", action="store_true",
                   help="also write wavefunctions.csv: z and the envelope psi (nm^-1/2) of every state")
    e.add_argument("--force", action="store_true", help="overwrite existing CSV files")
    e.add_argument("--quiet", action="store_true", help="print nothing (errors still go to stderr)")
    e.set_defaults(func=cmd_export)

    m = sub.add_parser("materials", help="list the material library, or one material with every source")
    m.add_argument("name", metavar="NAME", nargs="?",
                   help="a library material (without it: the list of materials)")
    m.add_argument("--x", type=float, help="alloy fraction (alloys): show the interpolated values")
    m.add_argument("--y", type=float, help="second composition (quaternaries InGaAsP, AlGaInAs)")
    m.add_argument("--on", metavar="SUBSTRATE",
                   help="show the band edges strained on this (001) substrate beside the unstrained "
                        "ones: NAME, NAME:X, NAME:X:Y or a lattice constant in nm (default T 300 K)")
    m.add_argument("--temperature", type=float, metavar="K", help="temperature for temperature-dependent values")
    m.add_argument("--json", action="store_true", help="print as JSON")
    m.set_defaults(func=cmd_materials)

    for modname in EXTRA_COMMANDS:
        importlib.import_module(modname).register(sub)
    for parser in _all_parsers(p):
        _short_quiet(parser)
    return p


#: ``--quiet`` of a command that has no progress or messages to hide
_NOTHING_TO_HIDE = "accepted for uniformity: this command prints only what was asked for"


def _all_parsers(parser) -> list:
    """``parser`` and every subcommand parser below it (``queue verify`` included)."""
    out = [parser]
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for child in dict.fromkeys(action.choices.values()):
                out += _all_parsers(child)
    return out


def _short_quiet(parser) -> None:
    """Every command accepts ``-q`` for ``--quiet`` (README.md, "Command line")."""
    if any(isinstance(a, argparse._SubParsersAction) for a in parser._actions) or parser.prog == "selfcon":
        return
    table = parser._option_string_actions
    if "--quiet" not in table:
        parser.add_argument("-q", "--quiet", action="store_true", help=_NOTHING_TO_HIDE)
    elif "-q" not in table:
        action = table["--quiet"]
        action.option_strings.insert(0, "-q")
        table["-q"] = action


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def _stdout_gone() -> int:
    """stdout's reader went away (``selfcon show r.h5 | head``): stop quietly, exit 0.

    Later writes (and the interpreter's final flush) go to /dev/null instead of raising."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError):
        pass
    return EXIT_OK


def _error(debug, text) -> None:
    if debug:
        traceback.print_exc()
    try:
        print(f"selfcon: error: {_one_line(text)}", file=sys.stderr)
    except (BrokenPipeError, ValueError):
        pass


def _our_warnings(show):
    """A ``warnings.showwarning`` that prints selfcon's own warnings as one line
    ``selfcon: warning: ...`` on stderr and hands any other to ``show``."""
    from selfcon.errors import UncheckedResultWarning

    def showwarning(message, category, filename, lineno, file=None, line=None):
        if issubclass(category, UncheckedResultWarning):
            print(f"selfcon: warning: {message}", file=sys.stderr)
        else:
            show(message, category, filename, lineno, file, line)
    return showwarning


def main(argv=None) -> int:
    """Entry point of the ``selfcon`` console script and ``python -m selfcon``; returns the exit code."""
    import warnings
    with warnings.catch_warnings():
        warnings.showwarning = _our_warnings(warnings.showwarning)
        return _main(argv)


def _main(argv=None) -> int:
    debug = os.environ.get("SELFCON_DEBUG", "") not in ("", "0")
    try:
        parser = build_parser()
        try:
            args = parser.parse_args(argv)
        except SystemExit as exc:       # --help, --version, usage errors (2)
            return exc.code if isinstance(exc.code, int) else (0 if exc.code is None else EXIT_INPUT)
        code = int(args.func(args))
        sys.stdout.flush()              # a closed pipe shows here, not at interpreter exit
        return code
    except BrokenPipeError:
        return _stdout_gone()
    except SelfconInputError as exc:
        _error(debug, exc)
        return EXIT_INPUT
    except SelfconEnvironmentError as exc:
        _error(debug, exc)
        return EXIT_ENVIRONMENT
    except OSError as exc:
        # the operating system refused something selfcon did not expect to fail (inputs
        # are checked first and give exit 2): disk full, permissions, I/O errors
        where = f"{exc.filename}: " if getattr(exc, "filename", None) else ""
        _error(debug, f"{where}{os_reason(exc)}")
        return EXIT_ENVIRONMENT
    except KeyboardInterrupt:
        print("selfcon: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:  # noqa: BLE001 - the one place unexpected errors become exit 1
        if debug:
            traceback.print_exc()
        print(f"selfcon: internal error: {type(exc).__name__}: {_one_line(exc)}", file=sys.stderr)
        if not debug:
            print("selfcon: rerun with SELFCON_DEBUG=1 to see the traceback", file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
