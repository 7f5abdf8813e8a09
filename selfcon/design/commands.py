"""`selfcon sweep-bias`, `selfcon tune` and `selfcon study-summary` (registered by selfcon.cli).

    selfcon sweep-bias DECK --from V1 --to V2 --step DV [-o OUT.h5] [--threshold NS_CM2]
                       [--fraction F] [--plot FIG] [--set PATH=VALUE]... [--json] [--quiet]
    selfcon tune DECK --vary PATH --target QUANTITY=VALUE [--bracket A B] [--xtol X]
                 [-o OUT.h5] [--set PATH=VALUE]... [--json] [--quiet]
    selfcon study-summary OUTDIR [--quantity NAME]... [--plot FIG] [--table-only] [--json]

Exit codes: 0 ok, 2 bad input (one line), 3 some solve did not converge (files still written),
4 the environment failed (disk full, permissions).  Outputs follow the rules of
selfcon.output.files: checked before the first solve, never an input, never replaced without --force.
"""
from __future__ import annotations

import json
import sys
from pathlib import Path

from selfcon.errors import EXIT_INPUT, EXIT_NOT_CONVERGED, EXIT_OK, SelfconInputError  # noqa: F401
from selfcon.output.numbers import fmt
from selfcon.output.report import jsonable


class DesignOptionError(SelfconInputError):
    """A bad option of a design command."""


def register(subparsers):
    from selfcon.solver.threads import add_argument as add_threads
    s = subparsers.add_parser("sweep-bias", help="solve along the gate bias: n_s(V), C-V, threshold",
                              description="Solve the deck at every gate bias from --from to --to (continuation "
                              "from the previous point); report threshold voltages, parallel-conduction onset "
                              "and capacitance; write one HDF5 file.")
    s.add_argument("deck", metavar="DECK", help="deck file (TOML); its surface contact takes the bias")
    s.add_argument("--from", dest="v_from", type=float, required=True, metavar="V1", help="first bias (V)")
    s.add_argument("--to", dest="v_to", type=float, required=True, metavar="V2", help="last bias (V)")
    s.add_argument("--step", type=float, required=True, metavar="DV", help="bias step (V, > 0)")
    s.add_argument("-o", "--output", default=None, metavar="OUT.h5", help="sweep file (HDF5)")
    s.add_argument("--threshold", type=float, default=1e10, metavar="NS_CM2",
                   help="channel n_s (cm^-2) defining the crossing threshold (default 1e10)")
    s.add_argument("--fraction", type=float, default=0.01,
                   help="doping-layer electrons / channel n_s that marks parallel conduction (default 0.01)")
    s.add_argument("--plot", default=None, metavar="FIG", help="n_s(V) per layer and C-V figure (.png/.svg/.pdf)")
    s.add_argument("--set", action="append", default=[], metavar="PATH=VALUE", help="deck override")
    s.add_argument("--force", action="store_true", help="overwrite an existing output file or figure")
    s.add_argument("--json", action="store_true", help="print the analysis as JSON")
    s.add_argument("--quiet", action="store_true", help="no per-point lines")
    add_threads(s)
    s.set_defaults(func=cmd_sweep_bias)

    t = subparsers.add_parser("tune", help="find the deck value that makes a quantity hit a target",
                              description="Bracketing root finder (brentq) over full solves with warm starts. "
                              "Quantities: ns, ns_total, e10, e0f, doping_charge, doping_free, or any summary key.")
    t.add_argument("deck", metavar="DECK", help="deck file (TOML) whose value is tuned")
    t.add_argument("--vary", required=True, metavar="PATH", help="deck path, e.g. layer.spacer.thickness")
    t.add_argument("--target", required=True, metavar="QUANTITY=VALUE", help="e.g. ns=3e11 (cm^-2)")
    t.add_argument("--bracket", type=float, nargs=2, metavar=("A", "B"), default=None,
                   help="search interval (default: half to twice the deck's value)")
    t.add_argument("--xtol", type=float, default=None, help="absolute tolerance on the value (default 1e-4 of the bracket)")
    t.add_argument("-o", "--output", default=None, metavar="OUT.h5", help="write the solution's result file")
    t.add_argument("--set", action="append", default=[], metavar="PATH=VALUE", help="deck override")
    t.add_argument("--force", action="store_true", help="overwrite an existing output file")
    t.add_argument("--json", action="store_true", help="print the answer as one JSON object and nothing else")
    t.add_argument("--quiet", action="store_true", help="no per-solve lines")
    add_threads(t)
    t.set_defaults(func=cmd_tune)

    u = subparsers.add_parser("study-summary", help="statistics and sensitivities of a finished study",
                              description="Mean, standard deviation, 5/50/95 percentiles of every summary "
                              "quantity of a study folder and its linear sensitivity to each varied parameter.")
    u.add_argument("outdir", help="the study's output folder (holding table.h5 / table.csv)")
    u.add_argument("--quantity", action="append", default=[], metavar="NAME",
                   help="only these quantities: a table column, a result summary key, or ns, e10, e0f, "
                        "ns:CHANNEL, e10:CHANNEL, e0f:CHANNEL as in tune")
    u.add_argument("--plot", default=None, metavar="FIG", help="histograms and sensitivity bars")
    u.add_argument("--table-only", action="store_true", help="do not read the job result files")
    u.add_argument("--force", action="store_true", help="overwrite an existing figure")
    u.add_argument("--json", action="store_true", help="print the statistics as one JSON object and nothing else")
    u.set_defaults(func=cmd_study_summary)


def _check_outputs(args, *, result=None, plot=None, inputs=()):
    """The command's outputs (``-o`` and ``--plot``), checked before any solve."""
    from selfcon.output.files import check_outputs, output
    outs = []
    if result is not None:
        outs.append(output(result, "result", "-o"))
    if plot is not None:
        outs.append(output(plot, "figure", "--plot"))
    check_outputs(outs, inputs=inputs, force=getattr(args, "force", False), error=DesignOptionError)
    return Path(result) if result is not None else None


def _load(args):
    from selfcon import api
    p = Path(args.deck)
    if not p.is_file():
        raise DesignOptionError("no such deck file", file=str(p))
    return api.load_deck(p, overrides=tuple(args.set or ()))


# --------------------------------------------------------------------------- sweep-bias

def _sweep_heading(deck) -> list[str]:
    """What the sweep table was run on, as the run summary states it (output/heading.py): the
    title (``deck title: ...`` when overridden), the temperature and each ``--set`` override."""
    from selfcon.output.heading import override_notes
    notes = override_notes(deck)
    lines = [f"deck title: {deck.title}" if notes else deck.title,
             f"T = {fmt(deck.temperature, 'K')} K, gate bias swept"]
    if notes:
        lines.append("set: " + "; ".join(notes))
    return [line for line in lines if line]


def cmd_sweep_bias(args) -> int:
    from selfcon.design.sweep import bias_points, sweep_bias
    from selfcon.solver.threads import configure
    configure(args.threads)
    deck = _load(args)
    if args.step <= 0:
        raise DesignOptionError(f"must be > 0 (the direction comes from --from and --to), got {args.step:g}",
                                key="--step")
    biases = bias_points(args.v_from, args.v_to, args.step)
    out = _check_outputs(args, result=args.output, plot=args.plot, inputs=[(args.deck, "the deck")])
    loud = not (args.quiet or args.json)

    def progress(k, v, r):
        if loud:
            ns = r.summary.get("channel_electron_sheet_density_cm2", float("nan"))
            flag = "" if r.converged else "  NOT CONVERGED"
            print(f"[{k + 1}/{biases.size}] V = {fmt(v, 'V', sign=True)} V  n_s(channel) = {fmt(ns, 'sheet')} cm^-2  "
                  f"{r.iterations} it{flag}", file=sys.stderr, flush=True)

    sw = sweep_bias(deck, biases, progress=progress, threshold_cm2=args.threshold, fraction=args.fraction)
    if out is not None:
        sw.save(out, force=args.force)
    if args.plot:
        sw.plot(args.plot, force=args.force)
    if args.json:
        print(json.dumps(jsonable({"bias_V": sw.bias.tolist(), "channel_cm2": sw.channel_density.tolist(),
                                    "capacitance_F_cm2": sw.capacitance.tolist(),
                                    "converged": sw.converged.tolist(), "channel": sw.channel, "channel_layer": sw.channel_layer,
                                    "analysis": sw.analysis, "output": str(out) if out else None}), indent=1))
    else:
        for line in _sweep_heading(deck):
            print(line)
        print(f"{'bias V':>8} {'n_s channel':>12} {'n doping':>10} {'Q C/cm2':>10} {'C F/cm2':>10} {'it':>3}")
        for i in range(sw.bias.size):
            print(f"{fmt(sw.bias[i], 'V', sign=True):>8} {fmt(sw.channel_density[i], 'sheet'):>12} "
                  f"{fmt(sw.doping_electrons[i], 'sheet'):>10} {fmt(sw.gate_charge[i], 'capacitance'):>10} "
                  f"{fmt(sw.capacitance[i], 'capacitance'):>10} {sw.iterations[i]:>3}"
                  + ("" if sw.converged[i] else "  not converged"))
        for line in sw.lines():
            print(line)
        if out is not None:
            print(f"sweep written to {out}")
        if args.plot:
            print(f"figure written to {args.plot}")
    if not sw.all_converged:
        bad = ", ".join(f"{v:+.3f}" for v in sw.bias[~sw.converged])
        print(f"selfcon: not converged at V = {bad}", file=sys.stderr)
        return EXIT_NOT_CONVERGED
    return EXIT_OK


# --------------------------------------------------------------------------- tune

def cmd_tune(args) -> int:
    from selfcon.design.tune import TuneError, parse_target, path_units, path_value, tune
    from selfcon.solver.threads import configure
    configure(args.threads)
    deck = _load(args)
    name, value = parse_target(args.target)
    if args.bracket is None:
        x0 = path_value(deck, args.vary)
        if isinstance(x0, bool) or not isinstance(x0, (int, float)) or x0 == 0:
            raise TuneError(f"the deck's value of {args.vary} is {x0!r}: give --bracket A B", key="--bracket")
        bracket = tuple(sorted((0.5 * x0, 2.0 * x0)))
    else:
        bracket = tuple(args.bracket)
    out = _check_outputs(args, result=args.output, inputs=[(args.deck, "the deck")])
    unit = path_units(args.vary)
    loud = not (args.quiet or args.json)

    def progress(x, q, r):
        if loud:
            flag = "" if r.converged else "  not converged"
            print(f"  {args.vary} = {x:.6g} {unit} -> {name} = {q:.6g}  ({r.iterations} it){flag}",
                  file=sys.stderr, flush=True)

    tr = tune(deck, args.vary, name, value, bracket, xtol=args.xtol, progress=progress)
    if out is not None and tr.result is not None:
        tr.result.save(out, force=args.force)
    if args.json:
        print(json.dumps(jsonable({"path": tr.path, "value": tr.value, "units": unit, "quantity": tr.quantity,
                                    "target": tr.target, "achieved": tr.achieved, "bracket": list(tr.bracket),
                                    "ends": list(tr.ends), "solves": tr.solves, "converged": tr.converged,
                                    "message": tr.message, "evaluations": tr.evaluations,
                                    "output": str(out) if out else None}), indent=1))
    else:
        qu = f" {tr.units}" if tr.units else ""
        kind = "sheet" if qu.strip() in ("cm^-2", "cm-2") else "plain"
        print(f"{tr.path} = {fmt(tr.value)} {unit} gives {tr.quantity} = {fmt(tr.achieved, kind)}{qu} "
              f"(target {fmt(tr.target, kind)}) after {tr.solves} solves; {tr.message}")
        for w in (tr.result.warnings if tr.result is not None else []):
            print(f"warning: {w}")
        if out is not None:
            print(f"result at the solution written to {out}")
    return EXIT_OK if tr.converged else EXIT_NOT_CONVERGED


# --------------------------------------------------------------------------- study-summary

def cmd_study_summary(args) -> int:
    from selfcon.design.tolerance import plot_summary, summarize_study
    folder = Path(args.outdir)
    _check_outputs(args, plot=args.plot, inputs=[(folder / name, "a file of the study folder") for name in
                                                  ("table.h5", "table.csv", "queue.sqlite")])
    s = summarize_study(args.outdir, quantities=args.quantity or None, from_results=not args.table_only)
    if args.plot:
        plot_summary(s, args.plot, quantities=args.quantity or None, force=args.force)
    if args.json:
        print(json.dumps(jsonable(s.as_dict()), indent=1))
    else:
        for line in s.lines():
            print(line)
        if args.plot:
            print(f"figure written to {args.plot}")
    return EXIT_OK
