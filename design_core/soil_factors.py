"""Point formulas of the axial method: the adhesion factor alpha, K, beta and N_q.

Units: c_u and sigma'_v in kPa, phi' in degrees. Each formula names its source; the rules
(``design_core.rules.Rules``) choose between them and hold their factors. Used by the shaft
profile (``design_core.shaft_profile``) and re-exported by ``design_core.axial``.
"""

from __future__ import annotations

import math

import numpy as np

from design_core.rules import Rules

PHI_RANGE_DEG = (10.0, 50.0)   # the range of phi' the formulas are used in (as Layer accepts)


def _phi(phi) -> np.ndarray:
    """phi' (degrees) as an array, refused outside ``PHI_RANGE_DEG`` or not finite."""
    phi = np.asarray(phi, dtype=float)
    lo, hi = PHI_RANGE_DEG
    if np.any(~np.isfinite(phi)) or np.any(phi < lo) or np.any(phi > hi):
        raise ValueError(f"phi must be between {lo:g} and {hi:g} degrees, got {phi.tolist()!r}")
    return phi

def alpha_api(psi: float | np.ndarray, alpha_max: float = 1.0) -> float | np.ndarray:
    """Adhesion factor alpha of the API rule for psi = c_u / sigma'_v (dimensionless).

    alpha = 0.5 psi^-0.5 for psi <= 1, 0.5 psi^-0.25 for psi > 1, alpha <= alpha_max
    (API RP 2A-WSD 21st ed. 2000, 6.4.2; API RP 2GEO 2011; Randolph & Murphy 1985).
    Valid for psi > 0.
    """
    psi = np.asarray(psi, dtype=float)
    if np.any(~np.isfinite(psi)) or np.any(psi <= 0.0):
        raise ValueError("psi (c_u / sigma'_v) must be a finite number greater than 0")
    alpha = np.minimum(np.where(psi <= 1.0, 0.5 * psi ** -0.5, 0.5 * psi ** -0.25), alpha_max)
    return float(alpha) if alpha.ndim == 0 else alpha


def alpha_factor(cu: float | np.ndarray, sigma_v_eff: float | np.ndarray,
                 rules: Rules | None = None) -> float | np.ndarray:
    """Adhesion factor alpha for c_u (kPa) and sigma'_v (kPa) by the rules' ``alpha_rule``.

    "api": see ``alpha_api``. "power": alpha = C (sigma'_v / c_u)^n with C = ``alpha_c`` and
    n = ``alpha_n`` (an engineer's rule, not a named published method).
    Both capped at ``alpha_max``. Valid for c_u > 0 and sigma'_v > 0 (kPa).
    """
    rules = rules or Rules()
    cu = np.asarray(cu, dtype=float)
    sig = np.asarray(sigma_v_eff, dtype=float)
    if np.any(~np.isfinite(cu)) or np.any(cu <= 0.0):
        raise ValueError("cu must be a finite number greater than 0 kPa")
    if np.any(~np.isfinite(sig)) or np.any(sig <= 0.0):
        raise ValueError("sigma_v_eff must be a finite number greater than 0 kPa")
    alpha = _f_alpha(cu, sig, rules) / cu
    return float(alpha) if alpha.ndim == 0 else alpha


def _f_alpha(cu: np.ndarray, sig: np.ndarray, rules: Rules) -> np.ndarray:
    """Unit shaft friction alpha c_u (kPa), written without dividing by sigma'_v (may be 0)."""
    if rules.alpha_rule == "api":
        # alpha c_u = 0.5 sqrt(c_u sigma'_v) for psi <= 1; 0.5 c_u^0.75 sigma'_v^0.25 for psi > 1
        f = np.where(cu <= sig, 0.5 * np.sqrt(cu * sig), 0.5 * cu ** 0.75 * sig ** 0.25)
    else:
        f = rules.alpha_c * sig ** rules.alpha_n * cu ** (1.0 - rules.alpha_n)
    return np.minimum(f, rules.alpha_max * cu)


def _alpha_kinks(rules: Rules) -> list[float]:
    """Values of psi = c_u / sigma'_v where the alpha rule has a kink (branch change or cap)."""
    amax = rules.alpha_max
    if rules.alpha_rule == "api":
        return [1.0, (0.5 / amax) ** 2, (0.5 / amax) ** 4]
    if rules.alpha_n > 0.0:
        return [(rules.alpha_c / amax) ** (1.0 / rules.alpha_n)]
    return []


def earth_pressure_k(phi: float | np.ndarray, rules: Rules | None = None) -> float | np.ndarray:
    """Earth pressure coefficient K on the shaft: 1 - sin(phi') (Jaky 1944) or ``k_fixed``.

    phi' in degrees (10-50).
    """
    rules = rules or Rules()
    phi = _phi(phi)
    k = 1.0 - np.sin(np.radians(phi)) if rules.k_rule == "jaky" else np.full_like(phi, rules.k_fixed)
    return float(k) if k.ndim == 0 else k


def beta_factor(phi: float | np.ndarray, rules: Rules | None = None) -> float | np.ndarray:
    """Shaft factor beta = K tan(delta), delta = ``delta_over_phi`` x phi' (phi' in degrees).

    f_s = beta sigma'_v (beta method; K by ``earth_pressure_k``; Burland 1973, the beta method).
    """
    rules = rules or Rules()
    phi = _phi(phi)
    beta = np.asarray(earth_pressure_k(phi, rules)) * np.tan(np.radians(rules.delta_over_phi * phi))
    return float(beta) if beta.ndim == 0 else beta


def n_q(phi: float | np.ndarray, rules: Rules | None = None) -> float | np.ndarray:
    """Base bearing factor N_q for phi' (degrees) by the rules' ``nq_rule``.

    "reissner": N_q = e^(pi tan phi') tan^2(45 + phi'/2) (Reissner 1924 / Prandtl, a closed
    form; lower than the deep-pile charts of Berezantzev 1961 or Meyerhof 1976). "fixed":
    ``nq_fixed``.
    """
    rules = rules or Rules()
    phi = _phi(phi)
    if rules.nq_rule == "fixed":
        out = np.full_like(phi, rules.nq_fixed)
    else:
        t = np.radians(phi)
        out = np.exp(math.pi * np.tan(t)) * np.tan(math.pi / 4 + t / 2) ** 2
    return float(out) if out.ndim == 0 else out

