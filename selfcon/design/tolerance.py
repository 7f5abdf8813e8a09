"""Growth-tolerance summaries of a finished study: statistics and linear sensitivities.

    s = summarize_study("inputs/design/tolerance_hall")     # the study's output folder
    s.stats["channel_density_cm2"]["std"], s.sensitivity["channel_density_cm2"]["layer.spacer.thickness"]

Reads the table the study runner wrote (``table.h5``, else ``table.csv``): the varied
paths are the columns between ``job`` and ``status``; the summary quantities are its
numeric figure columns, plus every numeric ``/summary`` attribute of the job result
files (``jobs/<id>.h5``) when they are there.  Only jobs with status ``done`` count.

For each quantity y: mean, standard deviation (ddof = 1), percentiles 5/50/95, and the
least-squares fit y = b0 + sum_j b_j x_j over the varied parameters (``numpy.linalg.lstsq``).
``b_j`` is in quantity units per deck unit; the standardised coefficient is
b_j * std(x_j) / std(y) (its square is the share of the variance of y explained by x_j
when the parameters are drawn independently).  A parameter without spread in the table
gets coefficient 0 (it cannot explain anything); a quantity without spread gets 0 for all.
"""
from __future__ import annotations

import csv
import math
import os
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from selfcon.errors import StudyError
from selfcon.output.numbers import fmt, quantity_of

#: table columns that are bookkeeping, not figures
BOOKKEEPING = ("job", "status", "attempts", "converged", "iterations", "seconds", "warm_start", "start", "result",
               "message", "residual_V")
#: /summary attributes of result files that are bookkeeping, not design figures
SUMMARY_SKIP = ("converged", "iterations", "residual_V", "nodes", "wall_time_s", "gauss_residual")
PERCENTILES = (5, 50, 95)


@dataclass
class ToleranceSummary:
    folder: str
    paths: list[str]                       # varied parameters
    quantities: list[str]
    n_done: int
    n_total: int
    stats: dict[str, dict[str, float]]     # quantity -> mean, std, p5, p50, p95, n
    sensitivity: dict[str, dict[str, float]]        # quantity -> path -> b_j (units per deck unit)
    standardized: dict[str, dict[str, float]]       # quantity -> path -> b_j std(x_j)/std(y)
    r_squared: dict[str, float]
    parameter_stats: dict[str, dict[str, float]] = field(default_factory=dict)   # path -> mean, std
    columns: dict[str, np.ndarray] = field(default_factory=dict, repr=False)
    #: done jobs left out because their result file cannot be trusted: reason -> count
    skipped: dict[str, int] = field(default_factory=dict)

    def head(self) -> str:
        """How many jobs the figures come from: "24 of 24 jobs done", or with skipped jobs
        "21 of 24 jobs used (24 done; 3 skipped: 2 result file missing, ...)"."""
        if not self.skipped:
            return f"{self.n_done} of {self.n_total} jobs done"
        k = sum(self.skipped.values())
        why = ", ".join(f"{n} {reason}" for reason, n in self.skipped.items())
        return (f"{self.n_done} of {self.n_total} jobs used ({self.n_done + k} done; {k} skipped: {why}; "
                f"`selfcon queue verify {self.folder}` requeues them)")

    def lines(self) -> list[str]:
        out = [f"{self.folder}: {self.head()}; varied: "
               + ", ".join(f"{p} (mean {fmt(self.parameter_stats[p]['mean'])}, std {fmt(self.parameter_stats[p]['std'])})"
                           for p in self.paths)]
        shown = self.table_quantities()
        w = max(len(q) for q in shown) if shown else 8
        out.append(f"{'quantity':<{w}}  {'mean':>11} {'std':>10} {'p5':>11} {'p50':>11} {'p95':>11}  {'R^2':>5}")
        for q in shown:
            s, kind = self.stats[q], quantity_of(q)
            r2 = self.r_squared[q]
            cells = [fmt(s[k], kind) for k in ("mean", "std", "p5", "p50", "p95")]
            out.append(f"{q:<{w}}  {cells[0]:>11} {cells[1]:>10} {cells[2]:>11} {cells[3]:>11} {cells[4]:>11}  "
                       f"{fmt(r2, 'fraction') if math.isfinite(r2) else '-':>5}")
        left = [q for q in self.quantities if q not in shown]
        if left:
            out.append(f"({len(left)} more without spread or equal to a row above: " + ", ".join(left) + ")")
        out.append("sensitivity d(quantity)/d(parameter) per deck unit [standardised: b * std(x) / std(y)]")
        for q in shown:
            if not self.r_squared[q] == self.r_squared[q]:          # NaN: nothing to regress
                continue
            parts = [f"{p}: {fmt(self.sensitivity[q][p], sign=True)} [{fmt(self.standardized[q][p], 'fraction', sign=True)}]"
                     for p in self.paths]
            out.append(f"  {q}: " + "; ".join(parts))
        return out

    def table_quantities(self) -> list[str]:
        """The quantities the table lists: those with spread, a column equal to an earlier one
        (``E0_eV`` = ``electron_E0_eV`` = ``E0_minus_EF_eV``) listed once, counts of warnings
        left out (they are no design figure)."""
        shown, seen = [], []
        for q in self.quantities:
            y = np.asarray(self.columns.get(q, []), float)
            st = self.stats[q]
            if not st.get("n") or not st["std"] > 0 or not np.any(np.isfinite(y)):
                continue
            if q.endswith("warnings") or q.startswith("warning"):
                continue
            if any(y.shape == z.shape and np.array_equal(y, z, equal_nan=True) for z in seen):
                continue
            shown.append(q)
            seen.append(y)
        return shown

    def as_dict(self) -> dict:
        return {"folder": self.folder, "paths": self.paths, "quantities": self.quantities, "n_done": self.n_done,
                "n_total": self.n_total, "stats": self.stats, "sensitivity": self.sensitivity,
                "standardized": self.standardized, "r_squared": self.r_squared,
                "parameter_stats": self.parameter_stats, "skipped": self.skipped}


# --------------------------------------------------------------------------- reading

def _float(v):
    if v is None or v == "":
        return math.nan
    if isinstance(v, (bytes, np.bytes_)):
        v = v.decode()
    if isinstance(v, str) and v.lower() in ("true", "false"):
        return 1.0 if v.lower() == "true" else 0.0
    try:
        return float(v)
    except (TypeError, ValueError):
        return math.nan


def read_table(folder) -> tuple[list[str], dict[str, list]]:
    """(column names, column -> list of values) of a study folder's table (h5 preferred)."""
    folder = Path(folder)
    if not folder.is_dir():
        raise StudyError("not a study output folder", file=str(folder))
    h5 = folder / "table.h5"
    if h5.is_file():
        import h5py
        with h5py.File(h5, "r") as f:
            if "table" not in f:
                raise StudyError("table.h5 has no /table group", file=str(h5))
            g = f["table"]
            cols = [c.decode() if isinstance(c, bytes) else str(c) for c in g.attrs["columns"]]
            data = {}
            for c in cols:
                arr = g[c][()]
                data[c] = [x.decode() if isinstance(x, bytes) else x for x in arr.tolist()]
        return cols, data
    path = folder / "table.csv"
    if not path.is_file():
        raise StudyError("no table.csv or table.h5 here (run `selfcon batch STUDY.toml` first)", file=str(folder))
    with open(path, newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    if not rows:
        raise StudyError("empty table", file=str(path))
    cols = rows[0]
    data = {c: [r[i] if i < len(r) else "" for r in rows[1:]] for i, c in enumerate(cols)}
    return cols, data


def _result_summaries(folder: Path, files: list[str]) -> list[dict]:
    """Numeric /summary attributes of each job file ({} where the file is missing)."""
    import h5py
    out = []
    for rel in files:
        p = folder / rel if rel else None
        d = {}
        if p is not None and p.is_file():
            try:
                with h5py.File(p, "r") as f:
                    if "summary" in f:
                        for k, v in f["summary"].attrs.items():
                            if k in SUMMARY_SKIP:
                                continue
                            if isinstance(v, (bool, np.bool_)):
                                continue
                            if isinstance(v, (int, float, np.integer, np.floating)):
                                d[k] = float(v)
            except OSError:
                pass
        out.append(d)
    return out


# --------------------------------------------------------------------------- statistics

def summarize_table(paths: list[str], quantities: dict[str, np.ndarray], parameters: dict[str, np.ndarray],
                    *, folder: str = "", n_total: int | None = None) -> ToleranceSummary:
    """Statistics and regression of ``quantities`` (name -> (n,)) on ``parameters`` (path -> (n,))."""
    n = len(next(iter(parameters.values()))) if parameters else 0
    X = np.column_stack([np.asarray(parameters[p], float) for p in paths]) if paths else np.zeros((n, 0))
    pstats = {p: {"mean": float(np.mean(X[:, j])) if n else math.nan,
                  "std": float(np.std(X[:, j], ddof=1)) if n > 1 else 0.0} for j, p in enumerate(paths)}
    stats, sens, std_sens, r2 = {}, {}, {}, {}
    for q, y in quantities.items():
        y = np.asarray(y, float)
        ok = np.isfinite(y) & np.all(np.isfinite(X), axis=1)
        yy, XX = y[ok], X[ok]
        m = yy.size
        if m == 0:
            stats[q] = {"mean": math.nan, "std": math.nan, "p5": math.nan, "p50": math.nan, "p95": math.nan, "n": 0}
        else:
            pc = np.percentile(yy, PERCENTILES)
            stats[q] = {"mean": float(np.mean(yy)), "std": float(np.std(yy, ddof=1)) if m > 1 else 0.0,
                        "p5": float(pc[0]), "p50": float(pc[1]), "p95": float(pc[2]), "n": int(m)}
        coef = {p: 0.0 for p in paths}
        scoef = {p: 0.0 for p in paths}
        sy = float(np.std(yy, ddof=1)) if m > 1 else 0.0
        spread = [j for j in range(len(paths)) if m > 1 and np.ptp(XX[:, j]) > 0]
        r2[q] = math.nan
        if spread and m > len(spread) and sy > 0:
            # regress on standardised columns (thicknesses in nm and dopings in cm^-3 differ by 1e18)
            xm = XX[:, spread].mean(axis=0)
            xs = XX[:, spread].std(axis=0, ddof=1)
            A = np.column_stack([np.ones(m), (XX[:, spread] - xm) / xs])
            beta, *_ = np.linalg.lstsq(A, yy, rcond=None)
            fit = A @ beta
            ss_res = float(np.sum((yy - fit) ** 2))
            ss_tot = float(np.sum((yy - yy.mean()) ** 2))
            r2[q] = 1.0 - ss_res / ss_tot if ss_tot > 0 else math.nan
            for k, j in enumerate(spread):
                coef[paths[j]] = float(beta[k + 1] / xs[k])
                scoef[paths[j]] = float(beta[k + 1]) / sy
        sens[q], std_sens[q] = coef, scoef
    return ToleranceSummary(folder=folder, paths=list(paths), quantities=list(quantities), n_done=n,
                            n_total=n if n_total is None else n_total, stats=stats, sensitivity=sens,
                            standardized=std_sens, r_squared=r2, parameter_stats=pstats,
                            columns={**{p: X[:, j] for j, p in enumerate(paths)},
                                     **{q: np.asarray(v, float) for q, v in quantities.items()}})


#: tune's short names (selfcon.design.tune) -> the study column or result summary key
SHORT_NAMES = {"ns": "channel_density_cm2", "e10": "E1_minus_E0_eV", "e0f": "E0_minus_EF_eV"}
#: ``short:NAME`` -> the per-channel result summary key ``channel.NAME.<figure>``
CHANNEL_SHORT_NAMES = {"ns": "sheet_density_cm2", "e10": "E1_minus_E0_eV", "e0f": "ground_energy_eV"}


def quantity_key(q: str) -> str:
    """The table column or summary key of a quantity name: ``ns``, ``e10``, ``e0f`` (the main
    channel's), ``ns:NAME``, ``e10:NAME``, ``e0f:NAME`` (channel NAME's), else ``q`` itself."""
    short, sep, channel = q.partition(":")
    if sep and short in CHANNEL_SHORT_NAMES and channel:
        return f"channel.{channel}.{CHANNEL_SHORT_NAMES[short]}"
    return SHORT_NAMES.get(q, q)


def summarize_study(folder: str | os.PathLike, *, quantities: Iterable[str] | None = None,
                    from_results: bool = True) -> ToleranceSummary:
    """Statistics and linear sensitivities of a finished study (see the module docstring).

    Parameters
    ----------
    folder : str or path-like
        The study's output folder (``selfcon batch`` wrote ``table.h5``/``table.csv`` there).
    quantities : iterable of str, optional
        Figures to summarise (default: every numeric figure column and result summary value);
        ``ns``, ``e10``, ``e0f`` and ``ns:NAME``, ... as in ``tune`` (:func:`quantity_key`).
    from_results : bool, optional
        Also read the numeric ``/summary`` attributes of the job result files.

    Returns
    -------
    ToleranceSummary
        ``stats[q]`` (mean, std, p5, p50, p95, n), ``sensitivity[q][path]`` (units of q per
        deck unit), ``standardized[q][path]`` and ``r_squared[q]``; ``lines()`` is the table
        ``selfcon study-summary`` prints.

    Raises
    ------
    StudyError
        No table, or no finished job in it.

    Examples
    --------
    Run the 40-wafer growth-tolerance study, then summarise it (a few minutes on 2 cores):

    >>> from selfcon.batch import run_study
    >>> from selfcon.design import summarize_study
    >>> code, counts, out = run_study("inputs/design/tolerance_hall.toml", workers=2)   # doctest: +SKIP
    >>> s = summarize_study(out)                                                        # doctest: +SKIP
    >>> s.stats["channel_density_cm2"]["std"]                                           # doctest: +SKIP
    >>> s.sensitivity["channel_density_cm2"]["layer.spacer.thickness"]                  # doctest: +SKIP
    >>> for line in s.lines(): print(line)                                              # doctest: +SKIP
    """
    folder = Path(folder)
    cols, data = read_table(folder)
    if "job" not in cols or "status" not in cols:
        raise StudyError("table has no job/status columns (not written by selfcon batch?)", file=str(folder))
    paths = cols[cols.index("job") + 1:cols.index("status")]
    status = [str(s) for s in data["status"]]
    done = [i for i, s in enumerate(status) if s == "done"]
    if not done:
        raise StudyError(f"no finished (done) jobs among {len(status)}", file=str(folder))
    skipped: dict[str, int] = {}
    if from_results and "result" in data:
        done = _trusted(folder, done, [str(r) for r in data["result"]], skipped)
        if not done:
            raise StudyError(f"no usable finished job among {len(status)}: "
                             + ", ".join(f"{n} {why}" for why, n in skipped.items())
                             + f"; run `selfcon queue verify {folder}` and `selfcon batch` again", file=str(folder))
    params = {}
    for p in paths:
        vals = np.array([_float(data[p][i]) for i in done])
        if not np.all(np.isfinite(vals)):
            raise StudyError(f"varied column {p!r} is not numeric", file=str(folder))
        params[p] = vals
    figures: dict[str, np.ndarray] = {}
    for c in cols[cols.index("status") + 1:]:
        if c in BOOKKEEPING:
            continue
        vals = np.array([_float(data[c][i]) for i in done])
        if np.any(np.isfinite(vals)):
            figures[c] = vals
    if from_results and "result" in data:
        summ = _result_summaries(folder, [str(data["result"][i]) for i in done])
        keys = []
        for d in summ:
            for k in d:
                if k not in keys and k not in figures:
                    keys.append(k)
        for k in keys:
            vals = np.array([d.get(k, math.nan) for d in summ])
            if np.any(np.isfinite(vals)):
                figures[k] = vals
    if quantities:
        missing = [q for q in quantities if quantity_key(q) not in figures]
        if missing:
            raise StudyError(f"no quantity {missing[0]!r} in this study", key="--quantity",
                             allowed=", ".join(figures))
        figures = {q: figures[quantity_key(q)] for q in quantities}
    out = summarize_table(paths, figures, params, folder=str(folder), n_total=len(status))
    out.skipped = skipped
    return out


def _trusted(folder: Path, done: list[int], files: list[str], skipped: dict) -> list[int]:
    """The done jobs whose result file is there and matches its checksum; the others are counted
    in ``skipped`` by reason (the statistics of the rest stay over one set of jobs).  A row that
    names no result file (a table made by hand) has only its table figures, kept as they are."""
    from selfcon.output.result import verify_result_file
    kept = []
    for i in done:
        state = verify_result_file(folder / files[i]) if files[i] else "ok"
        if state in ("ok", "unchecked"):
            kept.append(i)
        else:
            reason = "result file " + state.split(" (")[0]
            skipped[reason] = skipped.get(reason, 0) + 1
    return kept


def quantity_label(name: str) -> tuple[str, str]:
    """(long name, unit) of a study quantity: the study table's declaration
    (selfcon/output/schema.py, TABLE) when it has one, else the name without its unit
    suffix and the unit the suffix names (``_cm2`` -> cm-2, ``_eV`` -> eV, ...)."""
    from selfcon.output.schema import TABLE
    key = quantity_key(name)
    var = TABLE.get(f"table/{key}") if "<" not in key else None
    if var is not None and var.long_name and "<" not in var.path:
        return var.long_name, "" if var.units in (None, "", "1") else var.units
    units = {"_cm2": "cm-2", "_cm3": "cm-3", "_eV": "eV", "_meV": "meV", "_nm": "nm", "_V": "V", "_K": "K"}
    for suffix, unit in units.items():
        if key.endswith(suffix):
            return key[: -len(suffix)].replace("_", " ").replace(" minus ", " - "), unit
    return key.replace("_", " "), ""


def path_label(path: str) -> str:
    """A varied deck path with its unit from the key table: ``layer.spacer.thickness (nm)``."""
    from selfcon.input.deck import KEYS
    parts = path.split(".")
    table = "" if len(parts) == 1 else parts[0]
    spec = KEYS.get(table, {}).get(parts[-1])
    unit = getattr(spec, "unit", "") if spec is not None else ""
    return f"{path} ({unit})" if unit and unit not in ("-", "1") else path


_TEX_UNITS = {"cm-2": "cm$^{-2}$", "cm-3": "cm$^{-3}$", "cm^-2": "cm$^{-2}$", "cm^-3": "cm$^{-3}$"}


def _scaled(values, long: str, unit: str):
    """Values and axis text for a plot: eV shown in meV, densities as multiples of a power of
    ten written in the label (``10$^{11}$ cm$^{-2}$``), so no axis needs an offset text."""
    v = np.asarray(values, dtype=float)
    factor, text = 1.0, (f"{long} ({_TEX_UNITS.get(unit, unit)})" if unit else long)
    big = float(np.nanmax(np.abs(v))) if v.size and np.any(np.isfinite(v)) else 0.0
    if unit == "eV":
        factor, text = 1e3, f"{long} (meV)"
    elif big >= 1e4 or (0 < big < 1e-2):
        e = int(np.floor(np.log10(big)))
        factor = 10.0 ** -e
        text = f"{long} (10$^{{{e}}}$ {_TEX_UNITS.get(unit, unit)})".replace(" )", ")")
    return v * factor, text, factor


def _quantity_axis(s: ToleranceSummary, name: str):
    return _scaled(s.columns[name], *quantity_label(name))


def _path_axis(s: ToleranceSummary, path: str):
    text = path_label(path)
    long, _, unit = text.partition(" (")
    return _scaled(s.columns[path], long, unit.rstrip(")"))


def grid_axes(s: ToleranceSummary) -> list[str]:
    """The varied paths of a grid study (every combination of their values present once),
    at most two; [] for a sampled study (then the figure shows spreads)."""
    varied = [p for p in s.paths if np.unique(s.columns[p]).size > 1]
    if not varied or len(varied) > 2:
        return []
    combos = {tuple(float(s.columns[p][i]) for p in varied) for i in range(s.n_done)}
    expected = int(np.prod([np.unique(s.columns[p]).size for p in varied]))
    if len(combos) != s.n_done or expected != s.n_done or s.n_done < 3:
        return []
    return varied


#: our colours: histogram, percentile lines, sensitivity bars (raises / lowers), map colour ramp
SUMMARY_COLOURS = {"hist": "#a9bfd6", "hist_edge": "#3d5a80", "median": "#17365d", "band": "#6b4a9b",
                   "raises": "#3f7f3a", "lowers": "#b5543c", "line": "#2f6fb8"}
MAP_RAMP = ("#f4ead2", "#9fc2b0", "#4f7fb0", "#2b3f73")


def summary_figure(s: ToleranceSummary, quantities=None):
    """The figure of ``study-summary --plot`` (a matplotlib Figure, no pyplot).

    A grid study over one or two varied paths (:func:`grid_axes`): a line plot or a map of
    each quantity over them. Any other study: per quantity, the histogram of its spread
    with its median and 5/95 % percentiles, and the standardised sensitivity to each
    varied parameter. Axes carry the quantity's own name and unit; every line is in a legend.
    """
    from matplotlib.colors import LinearSegmentedColormap
    from matplotlib.figure import Figure
    from matplotlib.patches import Patch
    qs = list(quantities or s.table_quantities()[:4] or s.quantities[:4])
    grid = grid_axes(s)
    title = f"{Path(s.folder).name}: {s.n_done} of {s.n_total} jobs done"
    if len(grid) == 2:
        ncol = min(2, len(qs))
        nrow = -(-len(qs) // ncol)
        fig = Figure(figsize=(5.2 * ncol, 4.0 * nrow + 0.5), dpi=110, layout="constrained")
        axes = np.atleast_1d(fig.subplots(nrow, ncol, squeeze=False).ravel())
        px, py = grid
        (xv, xtext, _), (yv, ytext, _) = _path_axis(s, px), _path_axis(s, py)
        xs, ys = np.unique(xv), np.unique(yv)
        ramp = LinearSegmentedColormap.from_list("selfcon_ramp", MAP_RAMP)
        for ax, q in zip(axes, qs):
            qv, qtext, _ = _quantity_axis(s, q)
            Z = np.full((ys.size, xs.size), np.nan)
            for i in range(s.n_done):
                Z[np.searchsorted(ys, yv[i]), np.searchsorted(xs, xv[i])] = qv[i]
            mesh = ax.pcolormesh(xs, ys, Z, shading="nearest", cmap=ramp)
            fig.colorbar(mesh, ax=ax, label=qtext)
            ax.set_xlabel(xtext)
            ax.set_ylabel(ytext)
            ax.set_title(quantity_label(q)[0], fontsize=10)
        for ax in axes[len(qs):]:
            ax.set_axis_off()
        fig.suptitle(title + f" (grid {xs.size} x {ys.size})", fontsize=10)
        return fig
    if len(grid) == 1:
        fig = Figure(figsize=(5.2 * min(2, len(qs)), 3.4 * (-(-len(qs) // 2)) + 0.5), dpi=110, layout="constrained")
        axes = np.atleast_1d(fig.subplots(-(-len(qs) // 2), min(2, len(qs)), squeeze=False).ravel())
        xv, xtext, _ = _path_axis(s, grid[0])
        order = np.argsort(xv)
        for ax, q in zip(axes, qs):
            qv, qtext, _ = _quantity_axis(s, q)
            ax.plot(xv[order], qv[order], marker="o", ms=4, color=SUMMARY_COLOURS["line"],
                    label=f"{quantity_label(q)[0]}, one point per job")
            ax.set_xlabel(xtext)
            ax.set_ylabel(qtext)
            ax.set_title(quantity_label(q)[0], fontsize=10)
            ax.legend(fontsize=8, loc="best")
        for ax in axes[len(qs):]:
            ax.set_axis_off()
        fig.suptitle(title, fontsize=10)
        return fig
    fig = Figure(figsize=(10, 2.7 * len(qs) + 0.9), dpi=110, layout="constrained")
    rows = fig.subplots(len(qs), 2, squeeze=False)
    for row, q in zip(rows, qs):
        y, qtext, scale = _quantity_axis(s, q)
        y = y[np.isfinite(y)]
        row[0].hist(y, bins=max(5, min(30, y.size // 3)), color=SUMMARY_COLOURS["hist"],
                    edgecolor=SUMMARY_COLOURS["hist_edge"], lw=0.5, label="jobs")
        st = s.stats[q]
        row[0].axvline(st["p50"] * scale, color=SUMMARY_COLOURS["median"], lw=1.0, label="median")
        row[0].axvline(st["p5"] * scale, color=SUMMARY_COLOURS["band"], lw=0.9, ls=":",
                       label="5 % and 95 % percentiles")
        row[0].axvline(st["p95"] * scale, color=SUMMARY_COLOURS["band"], lw=0.9, ls=":")
        row[0].set_xlabel(qtext)
        row[0].set_ylabel("jobs")
        row[0].set_title(f"spread of {quantity_label(q)[0]}", fontsize=10)
        row[0].legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.0, 1.0), frameon=False)
        vals = [s.standardized[q][p] for p in s.paths]
        row[1].barh(range(len(s.paths)), vals,
                    color=[SUMMARY_COLOURS["raises"] if v >= 0 else SUMMARY_COLOURS["lowers"] for v in vals])
        row[1].set_yticks(range(len(s.paths)))
        row[1].set_yticklabels(s.paths, fontsize=7)
        row[1].axvline(0, color="#444444", lw=0.5)
        row[1].set_xlim(-1.05, 1.05)
        row[1].set_xlabel("standardised sensitivity b·σ(x)/σ(y)")
        row[1].set_title(f"what moves {quantity_label(q)[0]}", fontsize=10)
    fig.legend(handles=[Patch(color=SUMMARY_COLOURS["raises"], label="raising the parameter raises it"),
                        Patch(color=SUMMARY_COLOURS["lowers"], label="raising the parameter lowers it")],
               loc="outside lower center", ncol=2, fontsize=8, frameon=False)
    fig.suptitle(title, fontsize=10)
    return fig


def plot_summary(s: ToleranceSummary, path, *, quantities=None, force: bool = True) -> None:
    """Write :func:`summary_figure` to ``path`` (.png, .svg or .pdf), atomically."""
    from selfcon.output.files import save_figure
    save_figure(summary_figure(s, quantities), path, force=force, dpi=110)
