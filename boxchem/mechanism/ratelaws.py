"""Rate-law formulas (pure array functions) and the vectorised rate evaluator.

Units: temperature T [K], air number density [M] [molecule cm-3], rate
coefficients in molecule-cm-s units (s-1, cm3 molecule-1 s-1, cm6 molecule-2
s-1 as the order requires).  Every function broadcasts its array arguments
with numpy rules.

The falloff and chemical-activation forms are those of the NASA/JPL
evaluation: Burkholder, J. B., Sander, S. P., Abbatt, J., et al. (2019),
"Chemical Kinetics and Photochemical Data for Use in Atmospheric Studies,
Evaluation No. 19", JPL Publication 19-5, Jet Propulsion Laboratory,
Pasadena (section 2, "Termolecular reactions" and "Chemical activation
reactions"); the broadening factor with a constant Fc is the simplified form
of Troe, J. (1983), Ber. Bunsenges. Phys. Chem. 87, 161-169.

:class:`RateEvaluator` compiles a :class:`~boxchem.mechanism.model.Mechanism`
once into per-law index and parameter arrays, so evaluating every k at many
(T, [M]) points has no Python loop over reactions.
"""
from __future__ import annotations

import numpy as np

from .liquid_aerosol import liquid_gammas
from .model import Mechanism

__all__ = [
    "R_GAS", "SURFACE_COREACTANT_HALF", "arrhenius", "termolecular_falloff", "chemical_activation",
    "equilibrium_constant", "parametric_photolysis", "mean_molecular_speed", "surface_uptake",
    "parse_gamma_table", "gamma_from_table", "SURFACE_STATE_SPECIES", "RateEvaluator",
]

#: molar gas constant [J mol-1 K-1] (exact since the 2019 SI redefinition; CODATA 2018)
R_GAS = 8.314462618
#: co-reactant number density [cm-3] at which a surface reaction's rate is halved
#: (rate factor B/(B + B_half)); see DEVELOPERS.md, "Surface keys"
SURFACE_COREACTANT_HALF = 1.0e3


def arrhenius(temperature, A, E_over_R=0.0, n=0.0, Tref=300.0):
    """Modified Arrhenius expression k = A (T/Tref)^n exp(-(E/R)/T).

    temperature [K]; A in the unit of k; E_over_R [K]; n [1]; Tref [K].
    With n = 0 this is the form k = A exp(-(E/R)/T) of the JPL evaluation
    (Burkholder et al., 2019, section 1).
    """
    T = np.asarray(temperature, dtype=float)
    return A * (T / Tref) ** n * np.exp(-E_over_R / T)


def _broadening(x, Fc):
    # Fc^(1/(1 + log10(x)^2)); x -> 0 or inf gives log10 -> -inf/inf and factor 1
    with np.errstate(divide="ignore", invalid="ignore"):
        lg = np.log10(x)
        exponent = 1.0 / (1.0 + lg * lg)
    return np.where(np.isfinite(lg), Fc ** exponent, 1.0)


def termolecular_falloff(temperature, air_density, k0, n, kinf, m, Fc=0.6, Tref=300.0):
    """Effective second-order k [cm3 s-1] of a termolecular association (already contains [M]).

    k0(T) = k0 (T/Tref)^-n [cm6 s-1], kinf(T) = kinf (T/Tref)^-m [cm3 s-1],
    x = k0(T)[M]/kinf(T), k = k0(T)[M]/(1 + x) * Fc^(1/(1 + log10(x)^2)).
    Limits: k -> k0(T)[M] as [M] -> 0 and k -> kinf(T) as [M] -> inf.
    Burkholder et al. (2019), JPL Publication 19-5, section 2, eq. (1)-(2),
    where k0 and kinf are given at 300 K, k0(T) = k0^300 (T/300)^-n (the
    default Tref = 300; recalled from memory - issue 11 review: this line said
    298 K before, against the mechanism and docs).
    """
    T = np.asarray(temperature, dtype=float)
    M = np.asarray(air_density, dtype=float)
    k0T = k0 * (T / Tref) ** (-n)
    kinfT = kinf * (T / Tref) ** (-m)
    k0M = k0T * M
    x = k0M / kinfT
    return k0M / (1.0 + x) * _broadening(x, Fc)


def chemical_activation(temperature, air_density, k0, n, kinf, m, Fc=0.6, Tref=300.0):
    """Bimolecular k [cm3 s-1] of a reaction through a bound intermediate (chemical activation).

    k0(T) = k0 (T/Tref)^-n [cm3 s-1], kinf(T) = kinf (T/Tref)^-m [s-1],
    x = k0(T)[M]/kinf(T), k = k0(T)/(1 + x) * Fc^(1/(1 + log10(x)^2)).
    Limits: k -> k0(T) at low pressure, k -> kinf(T)/[M] at high pressure.
    Form of the chemical-activation expression of Burkholder et al. (2019),
    JPL Publication 19-5, section 2.
    """
    T = np.asarray(temperature, dtype=float)
    M = np.asarray(air_density, dtype=float)
    k0T = k0 * (T / Tref) ** (-n)
    kinfT = kinf * (T / Tref) ** (-m)
    x = k0T * M / kinfT
    return k0T / (1.0 + x) * _broadening(x, Fc)


def equilibrium_constant(temperature, K, B):
    """Equilibrium constant K(T) = K exp(B/T) [cm3 molecule-1] (Burkholder et al., 2019, section 3).

    temperature [K], B [K].  The decomposition rate coefficient of the adduct
    is k_forward(T, [M]) / K(T).
    """
    T = np.asarray(temperature, dtype=float)
    return K * np.exp(B / T)


def parametric_photolysis(solar_zenith_angle, l, m, n, horizon_zenith_angle=90.0):
    """Photolysis frequency J = l cos(chi)^m exp(-n sec(chi)) [s-1].

    solar_zenith_angle chi [degrees]; l [s-1], m, n [1].  J is exactly zero
    where chi >= horizon_zenith_angle [degrees] or cos(chi) <= 0.  The
    three-parameter form of Jenkin, M. E., Saunders, S. M. and Pilling, M. J.
    (1997), Atmos. Environ. 31, 81-104.
    """
    chi = np.radians(np.asarray(solar_zenith_angle, dtype=float))
    cos = np.cos(chi)
    lit = (np.degrees(chi) < horizon_zenith_angle) & (cos > 0)
    safe = np.where(lit, cos, 1.0)
    return np.where(lit, l * safe ** m * np.exp(-n / safe), 0.0)


def mean_molecular_speed(temperature_K, molar_mass_g_per_mol):
    """Mean speed of a gas molecule v = sqrt(8 R T / (pi M)) [cm s-1].

    temperature_K [K], molar_mass_g_per_mol [g mol-1].  Maxwell-Boltzmann
    kinetic theory, e.g. Seinfeld, J. H. and Pandis, S. N. (2016),
    Atmospheric Chemistry and Physics, 3rd ed., Wiley, section 9.1.
    """
    T = np.asarray(temperature_K, dtype=float)
    M_kg = np.asarray(molar_mass_g_per_mol, dtype=float) * 1e-3
    return np.sqrt(8.0 * R_GAS * T / (np.pi * M_kg)) * 100.0


def surface_uptake(temperature, gamma, molar_mass, surface_area):
    """First-order uptake coefficient k = gamma v S / 4 [s-1].

    temperature [K], gamma [1] (reaction probability), molar_mass [g mol-1]
    of the molecule taken up, surface_area S [cm2 cm-3].  Free-molecular
    (kinetic) regime, which holds for stratospheric particles (radii below a
    few micrometres); Seinfeld and Pandis (2016), section 12.3, and
    Burkholder et al. (2019), JPL Publication 19-5, section 5.
    """
    return 0.25 * np.asarray(gamma, dtype=float) * mean_molecular_speed(temperature, molar_mass) \
        * np.asarray(surface_area, dtype=float)


#: species whose partial pressures [Pa] the ``uptake`` law's parameterizations read
SURFACE_STATE_SPECIES = ("H2O", "HCl", "ClONO2")


def parse_gamma_table(text: str):
    """``"T:gamma T:gamma ..."`` (K, reaction probability; spaces or commas between pairs)
    -> (T [K], gamma [1]) arrays.  T must increase strictly, 0 < gamma <= 1.
    Raises ValueError saying which pair is wrong and what is valid."""
    pairs = [p for p in str(text).replace(",", " ").split() if p]
    if not pairs:
        raise ValueError(f"{text!r} holds no T:gamma pair; valid: e.g. \"185:0.3 195:0.1 205:0.01\"")
    temps, gammas = [], []
    for pair in pairs:
        t, sep, g = pair.partition(":")
        try:
            t_val, g_val = float(t), float(g)
        except ValueError:
            raise ValueError(f"{pair!r} is not T:gamma (two numbers with ':' between); "
                             f"valid: e.g. 195:0.1") from None
        if not sep or not np.isfinite(t_val) or t_val <= 0:
            raise ValueError(f"{pair!r}: T must be a temperature > 0 K; valid: e.g. 195:0.1")
        if not (0.0 < g_val <= 1.0):
            raise ValueError(f"{pair!r}: gamma={g_val:g} is not a reaction probability; valid: 0 < gamma <= 1")
        if temps and t_val <= temps[-1]:
            raise ValueError(f"{pair!r}: temperatures must increase strictly (after {temps[-1]:g} K)")
        temps.append(t_val)
        gammas.append(g_val)
    return np.array(temps), np.array(gammas)


def gamma_from_table(temperature, table_T, table_gamma):
    """gamma [1] at T [K] from a measured table: ln gamma linear in T between the
    nodes, the end values held outside them (common practice for tabulated uptake
    coefficients, no source; docs/heterogeneous.md)."""
    T = np.asarray(temperature, dtype=float)
    return np.exp(np.interp(T, table_T, np.log(table_gamma)))


def _indices(reactions, law: str) -> np.ndarray:
    return np.array([i for i, r in enumerate(reactions) if r.law == law], dtype=np.intp)


def _param(reactions, idx: np.ndarray, key: str) -> np.ndarray:
    return np.array([float(reactions[i].parameters[key]) for i in idx], dtype=float)


class RateEvaluator:
    """All rate coefficients of a mechanism, vectorised over conditions.

    Compiled once; afterwards :meth:`thermal` and :meth:`surface` evaluate
    each law group as arrays (no loop over reactions).  Results have shape
    ``conditions.shape + (n_reactions,)`` in mechanism reaction order, with
    zeros in the columns of other kinds.  Photolysis frequencies come from
    :class:`boxchem.photolysis.rates.PhotolysisRates`.
    """

    def __init__(self, mechanism: Mechanism):
        rx = mechanism.reactions
        self.n_reactions = len(rx)
        self.reaction_ids = tuple(r.id for r in rx)
        self.laws = tuple(r.law for r in rx)
        position = {r.id: i for i, r in enumerate(rx)}

        self._const = _indices(rx, "constant")
        self._const_k = _param(rx, self._const, "k")
        self._arr = _indices(rx, "arrhenius")
        self._arr_p = {k: _param(rx, self._arr, k) for k in ("A", "E/R", "n", "Tref")}
        self._fall = _indices(rx, "falloff")
        self._fall_p = {k: _param(rx, self._fall, k) for k in ("k0", "n", "kinf", "m", "Fc", "Tref")}
        self._chem = _indices(rx, "chemact")
        self._chem_p = {k: _param(rx, self._chem, k) for k in ("k0", "n", "kinf", "m", "Fc", "Tref")}
        self._rev = _indices(rx, "reverse")
        self._rev_of = np.array([position[str(rx[i].parameters["of"])] for i in self._rev], dtype=np.intp)
        self._rev_K = _param(rx, self._rev, "K")
        self._rev_B = _param(rx, self._rev, "B")

        self.photolysis_index = _indices(rx, "photolysis")

        # constant-gamma lines first, then uptake lines (gamma from a parameterization/table)
        self.constant_gamma_index = _indices(rx, "surface")
        self.uptake_index = _indices(rx, "uptake")
        self.surface_index = np.concatenate([self.constant_gamma_index, self.uptake_index]).astype(np.intp)
        n_const = self.constant_gamma_index.size
        self._surf_gamma = np.concatenate([_param(rx, self.constant_gamma_index, "gamma"),
                                           np.ones(self.uptake_index.size)])
        self._uptake_scale = _param(rx, self.uptake_index, "scale")
        self._uptake_radius_cm = _param(rx, self.uptake_index, "radius_um") * 1e-4
        #: uptake lines whose droplet radius follows the sulfate rule's droplets (radius_from=droplets)
        self._uptake_follows_droplets = np.array(
            [rx[i].parameters.get("radius_from", "droplets") == "droplets" for i in self.uptake_index], dtype=bool)
        self._uptake_model = [rx[i].parameters.get("gamma_from") for i in self.uptake_index]
        self._uptake_table = [parse_gamma_table(rx[i].parameters["gamma_table"])
                              if rx[i].parameters.get("gamma_from") is None else None
                              for i in self.uptake_index]
        self._uptake_slice = slice(n_const, n_const + self.uptake_index.size)
        #: True when some gamma depends on the box's composition (H2O, HCl, ClONO2)
        self.state_dependent_surface = any(m is not None for m in self._uptake_model)
        #: True when some gamma depends on temperature (k is then not just ~ sqrt(T))
        self.temperature_dependent_gamma = bool(self.uptake_index.size)
        species = {s.name: s for s in mechanism.species}
        self._surf_mass = np.array([species[rx[i].reactants[0].species].molar_mass
                                    for i in self.surface_index], dtype=float)
        on = [rx[i].parameters["on"] for i in self.surface_index]
        self._surf_psc = np.array([o in ("psc", "all") for o in on], dtype=float)
        self._surf_sulfate = np.array([o in ("sulfate", "all") for o in on], dtype=float)
        self._surf_ice = np.array([o in ("ice", "all") for o in on], dtype=float)

        self.thermal_index = np.sort(np.concatenate(
            [self._const, self._arr, self._fall, self._chem, self._rev])).astype(np.intp)

    def thermal(self, temperature, air_density) -> np.ndarray:
        """k of every thermal reaction at T [K] and [M] [cm-3] (broadcast); other columns 0."""
        T = np.asarray(temperature, dtype=float)
        M = np.asarray(air_density, dtype=float)
        shape = np.broadcast_shapes(T.shape, M.shape)
        T = np.broadcast_to(T, shape)[..., None]
        M = np.broadcast_to(M, shape)[..., None]
        k = np.zeros(shape + (self.n_reactions,))
        if self._const.size:
            k[..., self._const] = self._const_k
        if self._arr.size:
            p = self._arr_p
            k[..., self._arr] = arrhenius(T, p["A"], p["E/R"], p["n"], p["Tref"])
        if self._fall.size:
            p = self._fall_p
            k[..., self._fall] = termolecular_falloff(T, M, p["k0"], p["n"], p["kinf"], p["m"],
                                                      p["Fc"], p["Tref"])
        if self._chem.size:
            p = self._chem_p
            k[..., self._chem] = chemical_activation(T, M, p["k0"], p["n"], p["kinf"], p["m"],
                                                     p["Fc"], p["Tref"])
        if self._rev.size:
            # forward reactions of reverse laws are never reverse themselves (validated)
            k[..., self._rev] = k[..., self._rev_of] / equilibrium_constant(T, self._rev_K, self._rev_B)
        return k

    def surface_gamma(self, temperature, partial_pressures=None, droplet_radius_cm=None) -> np.ndarray:
        """gamma [1] of every surface column (order of ``surface_index``), shape T.shape + (n,).

        temperature [K]; ``partial_pressures``: mapping of SURFACE_STATE_SPECIES
        to partial pressures [Pa] (broadcast with T), needed when a line has
        gamma_from= (``state_dependent_surface``; without them those columns
        are NaN).  ``uptake`` lines carry their scale=.  ``droplet_radius_cm`` [cm]
        (broadcast with T; the sulfate rule's droplets, StsEquilibriumRule.droplet_radius_cm)
        replaces radius_um= of the gamma_from= lines with radius_from=droplets where it is > 0.
        """
        T = np.asarray(temperature, dtype=float)
        pp = dict(partial_pressures or {})
        # without the composition, gamma_from= columns are NaN (never a silent number)
        have_state = all(s in pp for s in SURFACE_STATE_SPECIES)
        shape = np.broadcast_shapes(T.shape, *(np.shape(v) for v in pp.values()))
        gamma = np.broadcast_to(self._surf_gamma, shape + self._surf_gamma.shape).copy()
        by_radius = {}   # the droplet properties once per radius (usually one radius)
        for j, (model, table) in enumerate(zip(self._uptake_model, self._uptake_table)):
            # one entry per uptake line (a handful), each a vectorised formula over conditions
            if model is not None and not have_state:
                g = np.nan
            elif model is not None:
                r = float(self._uptake_radius_cm[j])
                key = r
                if droplet_radius_cm is not None and self._uptake_follows_droplets[j]:
                    rd = np.asarray(droplet_radius_cm, dtype=float)
                    r, key = np.where(rd > 0.0, rd, r), ("droplets", r)
                if key not in by_radius:
                    by_radius[key] = liquid_gammas(T, pp["H2O"], pp["HCl"], pp["ClONO2"], r)
                g = by_radius[key][model]
            else:
                g = gamma_from_table(T, *table)
            gamma[..., self._uptake_slice.start + j] = np.broadcast_to(g, shape) * self._uptake_scale[j]
        return gamma

    def surface(self, temperature, psc_area, sulfate_area, ice_area=0.0, partial_pressures=None,
                droplet_radius_cm=None) -> np.ndarray:
        """k [s-1] of every surface reaction, k = gamma v S / 4; other columns 0.

        temperature [K], psc_area (NAT/STS clouds), sulfate_area and ice_area
        (ice clouds) [cm2 cm-3] (broadcast; ice_area defaults to 0).
        ``on=all`` reactions see the sum of the three areas.  ``partial_pressures``
        (SURFACE_STATE_SPECIES -> Pa) as in :meth:`surface_gamma`; without them
        the k of gamma_from= lines is NaN where their surface has area (0 where not);
        ``droplet_radius_cm`` as in :meth:`surface_gamma`.
        """
        T = np.asarray(temperature, dtype=float)
        psc = np.asarray(psc_area, dtype=float)
        sulf = np.asarray(sulfate_area, dtype=float)
        ice = np.asarray(ice_area, dtype=float)
        pp = dict(partial_pressures or {})
        shape = np.broadcast_shapes(T.shape, psc.shape, sulf.shape, ice.shape,
                                    *(np.shape(v) for v in pp.values()))
        k = np.zeros(shape + (self.n_reactions,))
        if self.surface_index.size:
            area = (np.broadcast_to(psc, shape)[..., None] * self._surf_psc
                    + np.broadcast_to(sulf, shape)[..., None] * self._surf_sulfate
                    + np.broadcast_to(ice, shape)[..., None] * self._surf_ice)
            gamma = self.surface_gamma(np.broadcast_to(T, shape), pp, droplet_radius_cm)
            ks = surface_uptake(np.broadcast_to(T, shape)[..., None], gamma, self._surf_mass, area)
            # no area: no uptake, whatever gamma; gamma_from= lines without the composition
            # stay NaN where they have area (surface_gamma), so a missing input never looks valid
            k[..., self.surface_index] = np.where(area == 0.0, 0.0, ks)
        return k
