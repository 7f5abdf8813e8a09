"""Generate selfcon/solver/kernels/_fermi_table.py: coefficients for F_{1/2} and F_{-1/2}.

Run:  python tools/gen_fermi_table.py      (needs mpmath; rewrites the data module)
      python tools/gen_fermi_table.py --check   (writes nothing; exit 1 if the module differs)

Method (three published pieces, see selfcon/solver/kernels/statistics.py):
  * eta <= SERIES_ETA : the alternating power series in e^eta,
        F_j(eta) = sum_{k>=1} (-1)^(k+1) e^(k eta) / k^(j+1)      (no table needed)
  * SERIES_ETA < eta < SOMMERFELD_ETA : piecewise Chebyshev expansions, one per
        unit interval, fitted here to the exact identity
        F_j(eta) = -Li_{j+1}(-e^eta)   (mpmath.polylog, 30 digits)
  * eta >= SOMMERFELD_ETA : the Sommerfeld asymptotic expansion
        F_j(eta) = eta^(j+1)/Gamma(j+2) * [1 + sum_k 2 (1 - 2^(1-2k)) zeta(2k)
                    Gamma(j+2)/Gamma(j+2-2k) eta^(-2k)]
        an asymptotic (divergent) series: its smallest term, reached near
        2k ~ eta, is of order e^(-eta), so it is used only for eta >= 32, where
        16 terms give < 5e-16 (checked below against mpmath).
All F_j are normalised with 1/Gamma(j+1) (Blakemore), so F_j -> e^eta for eta -> -inf
and dF_j/deta = F_{j-1}.

The script also checks the assembled approximation against mpmath on a dense
grid and prints the maximum relative error; it refuses to write the table if it
exceeds 1e-15 (the kernels then reach ~1e-15 in double precision).
"""
import argparse
import pathlib
import sys

import mpmath as mp

mp.mp.dps = 30

SERIES_ETA = -1.0
SOMMERFELD_ETA = 32.0
WIDTH = 1.0
DEGREE = 16          # Chebyshev degree per unit piece
N_SAMPLE = 32        # Chebyshev-Gauss points used for the fit (> DEGREE: near-minimax)
N_SOMMERFELD = 16    # Sommerfeld terms kept (optimal truncation near eta = 32)

OUT = pathlib.Path(__file__).resolve().parents[1] / "selfcon" / "solver" / "kernels" / "_fermi_table.py"


def fd_exact(j, eta):
    """Normalised F_j(eta) = -Li_{j+1}(-e^eta) (exact identity)."""
    return mp.re(-mp.polylog(j + 1, -mp.exp(eta)))


def cheb_fit(j, a, b):
    """Chebyshev coefficients c_0..c_DEGREE of F_j on [a, b] (c_0 halved already)."""
    m = N_SAMPLE
    xs = [mp.cos(mp.pi * (k + mp.mpf(1) / 2) / m) for k in range(m)]
    fs = [fd_exact(j, (a + b) / 2 + (b - a) / 2 * x) for x in xs]
    coef = []
    for n in range(DEGREE + 1):
        s = mp.fsum(f * mp.cos(n * mp.pi * (k + mp.mpf(1) / 2) / m) for k, f in enumerate(fs))
        coef.append(2 * s / m)
    coef[0] /= 2
    return coef


def sommerfeld_coeffs(j):
    """a_k, k=0..N-1: F_j = eta^(j+1)/Gamma(j+2) * sum_k a_k eta^(-2k)."""
    out = [mp.mpf(1)]
    for k in range(1, N_SOMMERFELD):
        # Gamma(j+2)/Gamma(j+2-2k) = (j+1) j (j-1) ... (j+2-2k)
        fall = mp.mpf(1)
        for m in range(2 * k):
            fall *= (j + 1 - m)
        out.append(2 * (1 - mp.mpf(2) ** (1 - 2 * k)) * mp.zeta(2 * k) * fall)
    return out


def eval_cheb(coef, a, b, eta):
    x = (2 * eta - a - b) / (b - a)
    b1 = b2 = mp.mpf(0)
    for c in coef[:0:-1]:
        b1, b2 = 2 * x * b1 - b2 + c, b1
    return x * b1 - b2 + coef[0]


def eval_sommerfeld(coef, j, eta):
    return eta ** (j + 1) / mp.gamma(j + 2) * mp.fsum(c * eta ** (-2 * k) for k, c in enumerate(coef))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--check", action="store_true",
                    help="regenerate in memory and compare with the committed module; write nothing")
    check = ap.parse_args(argv).check
    npiece = int(round((SOMMERFELD_ETA - SERIES_ETA) / WIDTH))
    tables = {}
    for name, j in (("F12", mp.mpf(1) / 2), ("FM12", -mp.mpf(1) / 2)):
        pieces = []
        for p in range(npiece):
            a = mp.mpf(SERIES_ETA) + p * WIDTH
            pieces.append(cheb_fit(j, a, a + WIDTH))
        tables[name] = pieces
        tables[name + "_SOMM"] = sommerfeld_coeffs(j)

    # self-check of the Chebyshev and Sommerfeld parts (the whole kernel is checked
    # by tests/test_statistics.py against scipy quad)
    worst = 0.0
    for name, j in (("F12", mp.mpf(1) / 2), ("FM12", -mp.mpf(1) / 2)):
        for p, coef in enumerate(tables[name]):
            a = mp.mpf(SERIES_ETA) + p * WIDTH
            for k in range(21):
                eta = a + WIDTH * k / 20
                ref = fd_exact(j, eta)
                worst = max(worst, float(abs(eval_cheb(coef, a, a + WIDTH, eta) / ref - 1)))
        for eta in (SOMMERFELD_ETA, SOMMERFELD_ETA + 0.5, SOMMERFELD_ETA + 3, 2 * SOMMERFELD_ETA):
            eta = mp.mpf(eta)
            ref = fd_exact(j, eta)
            worst = max(worst, float(abs(eval_sommerfeld(tables[name + "_SOMM"], j, eta) / ref - 1)))
    print(f"max relative error of Chebyshev pieces and Sommerfeld part (mp arithmetic): {worst:.2e}")
    if worst > 1e-15:
        raise SystemExit("table not accurate enough; raise DEGREE")

    def fmt(vals):
        return "[" + ", ".join(mp.nstr(v, 20, min_fixed=-1, max_fixed=-1) for v in vals) + "]"

    lines = [
        '"""GENERATED by tools/gen_fermi_table.py -- do not edit; rerun the script instead.',
        "",
        "Piecewise Chebyshev coefficients (unit intervals) for the normalised Fermi-Dirac",
        "integrals F_{1/2} and F_{-1/2} on [SERIES_ETA, SOMMERFELD_ETA], fitted to",
        "-Li_{j+1}(-e^eta) from mpmath.polylog, and the Sommerfeld expansion coefficients.",
        f"Self-check max relative error (Chebyshev + Sommerfeld, mp arithmetic): {worst:.2e}.",
        '"""',
        "import numpy as np",
        "",
        f"SERIES_ETA = {SERIES_ETA!r}",
        f"SOMMERFELD_ETA = {SOMMERFELD_ETA!r}",
        f"WIDTH = {WIDTH!r}",
        f"NPIECE = {npiece}",
        "",
    ]
    for name in ("F12", "FM12"):
        lines.append(f"CHEB_{name} = np.array([")
        for coef in tables[name]:
            lines.append("    " + fmt(coef) + ",")
        lines.append("])")
        lines.append("")
        lines.append(f"SOMM_{name} = np.array({fmt(tables[name + '_SOMM'])})")
        lines.append("")
    text = "\n".join(lines)
    if check:
        same = OUT.is_file() and OUT.read_text() == text
        print(f"{OUT.name}: {'current' if same else 'differs from what this script generates'}")
        return 0 if same else 1
    OUT.write_text(text)
    print(f"wrote {OUT}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
