"""Carrier statistics, Python side: thin array wrappers over selfcon.solver.kernels.statistics.

Internal units (DEVELOPERS.md, "Conventions"): eV, K, nm^-3, nm^-2; EF = 0 unless a
function takes the carrier's own Fermi level.  numba is imported
only when one of these functions is first called.
"""
import numpy as np

from selfcon.constants import DOS2D_PER_M0, KB_EV, NC_PER_M0_K
from selfcon.solver.kernels import load


def _k():
    """selfcon.solver.kernels.statistics, imported on first use (selfcon.solver.kernels.load)."""
    return load("statistics")


def fermi_half(eta):
    """Normalised F_{1/2}(eta) (Blakemore, -> e^eta for eta -> -inf); scalar or array."""
    a = np.asarray(eta, dtype=float)
    out = _k().fermi_half_array(np.ascontiguousarray(a.ravel())).reshape(a.shape)
    return float(out) if out.ndim == 0 else out


def fermi_half_deriv(eta):
    """dF_{1/2}/deta = F_{-1/2}(eta) (normalised); scalar or array."""
    a = np.asarray(eta, dtype=float)
    out = _k().fermi_mhalf_array(np.ascontiguousarray(a.ravel())).reshape(a.shape)
    return float(out) if out.ndim == 0 else out


def log1pexp(x):
    """ln(1 + e^x), safe for all x; scalar or array."""
    a = np.asarray(x, dtype=float)
    return np.logaddexp(0.0, a) if a.ndim else float(_k().log1pexp(float(a)))


def effective_dos(mass_m0, temperature):
    """3D effective density of states N = 2 (m kT / 2 pi hbar^2)^(3/2) in nm^-3."""
    return NC_PER_M0_K * (np.asarray(mass_m0, dtype=float) * temperature) ** 1.5


def dos2d(mass_par_m0, valleys=1):
    """2D density of states g m/(pi hbar^2) (spin included) in nm^-2 eV^-1."""
    return valleys * DOS2D_PER_M0 * np.asarray(mass_par_m0, dtype=float)


def subband_density(energies, dos, temperature, sign=1, fermi=0.0):
    """Sheet density (nm^-2) per subband; sign +1 electrons, -1 holes (energies in eV, on the
    electron energy scale); ``fermi``: the carrier's own Fermi level (eV, same scale)."""
    kT = KB_EV * temperature
    return _k().subband_density(np.ascontiguousarray(np.asarray(energies, dtype=float) - fermi),
                                np.ascontiguousarray(dos, dtype=float), kT, int(sign))
