"""Reaction probabilities on liquid sulfuric-acid aerosol, from temperature and composition.

Pure array functions (numpy broadcasting).  Inputs in SI at the edge:
temperature [K], partial pressures [Pa], particle radius [cm]; the published
formulas use hPa (= mbar) for water and atm for HCl, converted here.

Sources (see docs/heterogeneous.md for the equations written out):

* Shi, Q., Jayne, J. T., Kolb, C. E., Worsnop, D. R. and Davidovits, P.
  (2001), Kinetic model for reaction of ClONO2 with H2O and HCl and HOCl
  with HCl in sulfuric acid solutions, J. Geophys. Res. 106, 24259-24274:
  water activity, solution density, viscosity, acidity, HCl solubility and
  the resistance model for gamma (their Appendix); the treatment the JPL
  19-5 evaluation (Burkholder et al., 2019, section 5) recommends for
  ClONO2 + H2O, ClONO2 + HCl and HOCl + HCl on sulfuric acid aerosol.
* Tabazadeh, A., Toon, O. B., Clegg, S. L. and Hamill, P. (1997), A new
  parameterization of H2SO4/H2O aerosol composition: atmospheric
  implications, Geophys. Res. Lett. 24, 1931-1934: H2SO4 molality from the
  water activity (the form Shi et al. use).
* Hanson, D. R. (2003), Reactivity of BrONO2 and HOBr on sulfuric acid
  solutions at low temperatures, J. Geophys. Res. 108(D8), 4239:
  gamma(BrONO2 + H2O) as a function of H2SO4 weight percent.

Coefficients are RECALLED FROM MEMORY of these papers (the team's search
tools did not return their text); tests/test_liquid_aerosol.py checks them
against values recalled from the papers' figures and against limits that do
not depend on the recall (docs/heterogeneous.md lists what is checked how).
Valid for binary H2SO4/H2O solutions, about 185-260 K, 35-80 wt% H2SO4
(Shi et al. 2001); HNO3 uptake into ternary solutions is not represented.
"""
from __future__ import annotations

import functools

import numpy as np

__all__ = ["water_saturation_pressure_hPa", "water_activity", "sulfuric_acid_molality",
           "sulfuric_acid_weight_percent", "solution_properties", "gamma_clono2_shi2001",
           "gamma_hocl_hcl_shi2001", "gamma_brono2_h2o_hanson2003", "LIQUID_GAMMA_MODELS",
           "liquid_gamma", "liquid_gammas", "DEFAULT_SULFATE_RADIUS_CM"]

#: radius [cm] of background sulfate droplets when a line gives none (0.1 um;
#: a typical background-aerosol surface-area-weighted radius; common practice, no source)
DEFAULT_SULFATE_RADIUS_CM = 1.0e-5
_PA_PER_HPA = 100.0
_PA_PER_ATM = 101325.0
_R_L_ATM = 0.082          # L atm mol-1 K-1, the value Shi et al. (2001) use


def water_saturation_pressure_hPa(temperature):
    """Vapour pressure of (supercooled) liquid water p0 [hPa] at T [K] (Shi et al. 2001, appendix)."""
    T = np.asarray(temperature, dtype=float)
    return np.exp(18.452406985 - 3505.1578807 / T - 330918.55082 / T ** 2 + 12725068.262 / T ** 3)


def water_activity(temperature, water_pressure_Pa):
    """a_w = p(H2O) / p0(T) [1], clipped to (1e-6, 1] (Shi et al. 2001, appendix)."""
    p_hpa = np.asarray(water_pressure_Pa, dtype=float) / _PA_PER_HPA
    return np.clip(p_hpa / water_saturation_pressure_hPa(temperature), 1e-6, 1.0)


# Tabazadeh et al. (1997), Table 1: y = a a_w^b + c a_w + d, molality at 190 K (1) and 260 K (2)
_TAB97 = (
    # a_w upper bound, (a1, b1, c1, d1), (a2, b2, c2, d2)
    (0.05, (12.37208932, -0.16125516114, -30.490657554, -2.1133114241),
           (13.455394705, -0.1921312255, -34.285174607, -1.7620073078)),
    (0.85, (11.820654354, -0.20786404244, -4.807306373, -5.1727540348),
           (12.891938068, -0.23233847708, -6.4261237757, -4.9005471319)),
    (1.01, (-180.06541028, -0.38601102592, -93.317846778, 273.88132245),
           (-176.95814097, -0.36257048154, -90.469744201, 267.45509988)),
)


def sulfuric_acid_molality(temperature, water_activity_):
    """H2SO4 molality m [mol kg-1] of a droplet in equilibrium with water activity a_w [1].

    Tabazadeh et al. (1997), eq. (1)-(2): y1, y2 fits at 190 and 260 K,
    m = y1 + (T - 190)(y2 - y1)/70, in three ranges of a_w.
    """
    T = np.asarray(temperature, dtype=float)
    aw = np.asarray(water_activity_, dtype=float)
    lo = 0.0
    m = np.zeros(np.broadcast_shapes(T.shape, aw.shape))
    for hi, c1, c2 in _TAB97:
        y1 = c1[0] * aw ** c1[1] + c1[2] * aw + c1[3]
        y2 = c2[0] * aw ** c2[1] + c2[2] * aw + c2[3]
        m = np.where((aw > lo) & (aw <= hi), y1 + (T - 190.0) * (y2 - y1) / 70.0, m)
        lo = hi
    return np.maximum(m, 1e-3)


def sulfuric_acid_weight_percent(temperature, water_pressure_Pa):
    """H2SO4 weight percent [%] of binary droplets at T [K] and p(H2O) [Pa].

    wt = 9800 m / (98 m + 1000) with m from Tabazadeh et al. (1997) (as in Shi et al. 2001).
    """
    m = sulfuric_acid_molality(temperature, water_activity(temperature, water_pressure_Pa))
    return 9800.0 * m / (98.0 * m + 1000.0)


def _scalar(*args) -> bool:
    return all(np.ndim(a) == 0 for a in args)


def solution_properties(temperature, water_pressure_Pa):
    """Composition and bulk properties of the droplet (see :func:`_solution_properties`)."""
    if _scalar(temperature, water_pressure_Pa):
        # the time loop asks for the same conditions many times: memoised for scalars
        return _solution_properties_scalar(float(temperature), float(water_pressure_Pa))
    return _solution_properties(temperature, water_pressure_Pa)


@functools.lru_cache(maxsize=512)
def _solution_properties_scalar(temperature, water_pressure_Pa):
    return {k: float(v) for k, v in _solution_properties(temperature, water_pressure_Pa).items()}


def _solution_properties(temperature, water_pressure_Pa):
    """Composition and bulk properties of the droplet (Shi et al. 2001, appendix).

    Returns a dict: ``aw`` [1], ``molality`` [mol kg-1], ``wt`` [%],
    ``density`` [g cm-3], ``molarity`` [mol L-1], ``x`` (H2SO4 mole
    fraction), ``viscosity`` [cP], ``acidity`` a_H [1], ``h_hcl`` HCl
    solubility [M atm-1] (the HCl Henry coefficient of Shi et al., their eq. for H_HCl).
    """
    T = np.asarray(temperature, dtype=float)
    aw = water_activity(T, water_pressure_Pa)
    m = sulfuric_acid_molality(T, aw)
    wt = 9800.0 * m / (98.0 * m + 1000.0)
    z1 = 0.12364 - 5.6e-7 * T ** 2
    z2 = -0.02954 + 1.814e-7 * T ** 2
    z3 = 2.343e-3 - 1.487e-6 * T - 1.324e-8 * T ** 2
    rho = 1.0 + z1 * m + z2 * m ** 1.5 + z3 * m ** 2
    molarity = rho * wt / 9.8
    x = wt / (wt + (100.0 - wt) * 98.0 / 18.0)
    A = 169.5 + 5.18 * wt - 0.0825 * wt ** 2 + 3.27e-3 * wt ** 3
    T0 = 144.11 + 0.166 * wt - 0.015 * wt ** 2 + 2.18e-4 * wt ** 3
    eta = A * T ** -1.43 * np.exp(448.0 / (T - T0))
    a_h = np.exp(60.51 - 0.095 * wt + 0.0077 * wt ** 2 - 1.61e-5 * wt ** 3
                 - (1.76 + 2.52e-4 * wt ** 2) * np.sqrt(T) + (-805.89 + 253.05 * wt ** 0.076) / np.sqrt(T))
    h_hcl = (0.094 - 0.61 * x + 1.2 * x ** 2) * np.exp(-8.68 + (8515.0 - 10718.0 * x ** 0.7) / T)
    return {"aw": aw, "molality": m, "wt": wt, "density": rho, "molarity": molarity, "x": x,
            "viscosity": eta, "acidity": a_h, "h_hcl": h_hcl}


def _reacto_diffusive_factor(radius_cm, length_cm):
    """f = coth(r/l) - l/r: the fraction of the droplet volume that reacts (Shi et al. 2001)."""
    q = np.asarray(radius_cm, dtype=float) / np.asarray(length_cm, dtype=float)
    q = np.clip(q, 1e-6, 1e6)
    # coth(q) - 1/q, with the small-q series q/3 to avoid cancellation
    return np.where(q < 1e-3, q / 3.0, 1.0 / np.tanh(q) - 1.0 / q)


def gamma_clono2_shi2001(temperature, water_pressure_Pa, hcl_pressure_Pa, clono2_pressure_Pa=0.0,
                         radius_cm=DEFAULT_SULFATE_RADIUS_CM):
    """(gamma(ClONO2 + H2O), gamma(ClONO2 + HCl)) [1] on sulfuric acid droplets.

    temperature [K], p(H2O), p(HCl), p(ClONO2) [Pa], droplet radius [cm].
    Shi et al. (2001), appendix: bulk hydrolysis with k_hydr = (k_H2O + k_H a_H) a_w,
    bulk and surface reaction with dissolved HCl, the reacto-diffusive factor of
    a droplet of radius r, the HCl-depletion factor F_HCl and mass accommodation 1.
    """
    g_h2o, g_hcl, _ = _clono2_terms(temperature, water_pressure_Pa, hcl_pressure_Pa,
                                    clono2_pressure_Pa, radius_cm)
    return g_h2o, g_hcl


def _clono2_terms(temperature, water_pressure_Pa, hcl_pressure_Pa, clono2_pressure_Pa, radius_cm):
    if _scalar(temperature, water_pressure_Pa, hcl_pressure_Pa, clono2_pressure_Pa, radius_cm):
        return _clono2_terms_scalar(float(temperature), float(water_pressure_Pa), float(hcl_pressure_Pa),
                                    float(clono2_pressure_Pa), float(radius_cm))
    return _clono2_terms_array(temperature, water_pressure_Pa, hcl_pressure_Pa, clono2_pressure_Pa,
                               radius_cm)


@functools.lru_cache(maxsize=512)
def _clono2_terms_scalar(*args):
    return tuple(float(v) for v in _clono2_terms_array(*args))


def _clono2_terms_array(temperature, water_pressure_Pa, hcl_pressure_Pa, clono2_pressure_Pa, radius_cm,
                        props=None):
    # (gamma_H2O, gamma_HCl, F_HCl) of Shi et al. (2001); see gamma_clono2_shi2001
    T = np.asarray(temperature, dtype=float)
    s = props if props is not None else solution_properties(T, water_pressure_Pa)
    p_hcl = np.maximum(np.asarray(hcl_pressure_Pa, dtype=float), 0.0) / _PA_PER_ATM
    p_cln = np.maximum(np.asarray(clono2_pressure_Pa, dtype=float), 0.0) / _PA_PER_ATM
    c = 1474.0 * np.sqrt(T)                                   # mean speed [cm s-1]
    S = 0.306 + 24.0 / T
    h = 1.6e-6 * np.exp(4710.0 / T - S * s["molarity"])        # H(ClONO2) [M atm-1]
    D = 5.0e-8 * T / s["viscosity"]                            # [cm2 s-1]
    k_h2o = 1.95e10 * np.exp(-2800.0 / T)
    k_h = 1.22e12 * np.exp(-6200.0 / T)
    k_hydr = (k_h2o + k_h * s["acidity"]) * s["aw"]           # [s-1]
    gb_h2o = 4.0 * h * _R_L_ATM * T * np.sqrt(D * k_hydr) / c
    m_hcl = s["h_hcl"] * p_hcl                                 # dissolved HCl [M]
    k_hcl = 7.9e11 * s["acidity"] * D * m_hcl                  # [s-1]
    length = np.sqrt(D / (k_hydr + k_hcl))
    f = _reacto_diffusive_factor(radius_cm, length)
    g_rxn = f * gb_h2o * np.sqrt(1.0 + k_hcl / k_hydr)
    gb_hcl = g_rxn * k_hcl / (k_hcl + k_hydr)
    g_s = 66.12 * np.exp(-1374.0 / T) * h * m_hcl
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(p_hcl > 0.0, p_cln / np.where(p_hcl > 0.0, p_hcl, 1.0), 0.0)
    f_hcl = 1.0 / (1.0 + 0.612 * (g_s + gb_hcl) * ratio)
    g_s_eff = f_hcl * g_s
    gb_hcl_eff = f_hcl * gb_hcl
    gamma = 1.0 / (1.0 + 1.0 / (g_s_eff + f_hcl * g_rxn))
    with np.errstate(divide="ignore", invalid="ignore"):
        share = np.where(g_s_eff + f_hcl * g_rxn > 0.0,
                         (g_s_eff + gb_hcl_eff) / (g_s_eff + f_hcl * g_rxn), 0.0)
    gamma_hcl = gamma * share
    return gamma - gamma_hcl, gamma_hcl, f_hcl


def gamma_hocl_hcl_shi2001(temperature, water_pressure_Pa, hcl_pressure_Pa, clono2_pressure_Pa=0.0,
                           radius_cm=DEFAULT_SULFATE_RADIUS_CM, *, _props=None, _f_hcl=None):
    """gamma(HOCl + HCl) [1] on sulfuric acid droplets (Shi et al. 2001, appendix).

    temperature [K], p(H2O), p(HCl), p(ClONO2) [Pa] (ClONO2 enters through the
    HCl-depletion factor of the ClONO2 reaction), droplet radius [cm].
    """
    T = np.asarray(temperature, dtype=float)
    s = _props if _props is not None else solution_properties(T, water_pressure_Pa)
    p_hcl = np.maximum(np.asarray(hcl_pressure_Pa, dtype=float), 0.0) / _PA_PER_ATM
    c = 2009.0 * np.sqrt(T)
    S = 0.0776 + 59.18 / T
    h = 1.91e-6 * np.exp(5862.4 / T - S * s["molarity"])      # H(HOCl) [M atm-1]
    D = 6.4e-8 * T / s["viscosity"]
    m_hcl = s["h_hcl"] * p_hcl
    k = 1.25e9 * s["acidity"] * D * m_hcl                      # [s-1]
    k_safe = np.maximum(k, 1e-30)       # no HCl: l -> large, f -> 0 (and gamma -> 0 below)
    length = np.sqrt(D / k_safe)
    f = _reacto_diffusive_factor(radius_cm, length)
    g_rxn = 4.0 * h * _R_L_ATM * T * np.sqrt(D * k) / c
    # the HCl-depletion factor F_HCl of the ClONO2 reaction applies to HOCl + HCl too (Shi et al. 2001)
    f_hcl = (_f_hcl if _f_hcl is not None else
             _clono2_terms(T, water_pressure_Pa, hcl_pressure_Pa, clono2_pressure_Pa, radius_cm)[2])
    x = f * g_rxn * f_hcl
    with np.errstate(divide="ignore"):
        return np.where(x > 0.0, 1.0 / (1.0 + 1.0 / np.where(x > 0.0, x, 1.0)), 0.0)


def gamma_brono2_h2o_hanson2003(temperature, water_pressure_Pa, hcl_pressure_Pa=0.0,
                                clono2_pressure_Pa=0.0, radius_cm=DEFAULT_SULFATE_RADIUS_CM, *, _props=None):
    """gamma(BrONO2 + H2O) [1] on sulfuric acid: 1/(1/0.88 + 1/(exp(29.24 - 0.396 wt) + 0.114)).

    wt [%] from :func:`sulfuric_acid_weight_percent`; Hanson (2003), JGR 108(D8), 4239
    (the form the JPL 19-5 evaluation recommends; recalled from memory).
    """
    wt = (_props["wt"] if _props is not None
          else sulfuric_acid_weight_percent(temperature, water_pressure_Pa))
    return 1.0 / (1.0 / 0.88 + 1.0 / (np.exp(29.24 - 0.396 * wt) + 0.114))


def _clono2_h2o(*a):
    return gamma_clono2_shi2001(*a)[0]


def _clono2_hcl(*a):
    return gamma_clono2_shi2001(*a)[1]


#: gamma_from= names of the ``uptake`` law -> function(T, pH2O, pHCl, pClONO2, radius) [1]
LIQUID_GAMMA_MODELS = {
    "shi2001_clono2_h2o": _clono2_h2o,
    "shi2001_clono2_hcl": _clono2_hcl,
    "shi2001_hocl_hcl": gamma_hocl_hcl_shi2001,
    "hanson2003_brono2_h2o": gamma_brono2_h2o_hanson2003,
}


def liquid_gammas(temperature, water_pressure_Pa, hcl_pressure_Pa, clono2_pressure_Pa=0.0,
                  radius_cm=DEFAULT_SULFATE_RADIUS_CM) -> dict:
    """Every LIQUID_GAMMA_MODELS gamma [1] at once (the droplet properties computed once)."""
    T = np.asarray(temperature, dtype=float)
    props = _solution_properties(T, water_pressure_Pa)
    g_h2o, g_hcl, f_hcl = _clono2_terms_array(T, water_pressure_Pa, hcl_pressure_Pa, clono2_pressure_Pa,
                                              radius_cm, props)
    return {"shi2001_clono2_h2o": g_h2o, "shi2001_clono2_hcl": g_hcl,
            "shi2001_hocl_hcl": gamma_hocl_hcl_shi2001(T, water_pressure_Pa, hcl_pressure_Pa,
                                                       clono2_pressure_Pa, radius_cm, _props=props,
                                                       _f_hcl=f_hcl),
            "hanson2003_brono2_h2o": gamma_brono2_h2o_hanson2003(T, water_pressure_Pa, _props=props)}


def liquid_gamma(name, temperature, water_pressure_Pa, hcl_pressure_Pa, clono2_pressure_Pa=0.0,
                 radius_cm=DEFAULT_SULFATE_RADIUS_CM):
    """gamma [1] of the parameterization ``name`` (a key of LIQUID_GAMMA_MODELS)."""
    return LIQUID_GAMMA_MODELS[name](temperature, water_pressure_Pa, hcl_pressure_Pa,
                                     clono2_pressure_Pa, radius_cm)
