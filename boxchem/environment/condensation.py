"""Gas/condensed partition of HNO3 and H2O in equilibrium with NAT, STS and ice.

The published equilibrium treatment of PSC uptake: the particles hold the
excess of the total over the saturation pressure, so the gas phase carries

* HNO3: min(total, p_eq,NAT(T, p_H2O)) over NAT (Hanson and Mauersberger
  1988, ``psc.nat_hno3_equilibrium_pressure``), or the gas-phase share of
  the Carslaw et al. (1995) STS equilibrium (``sts.sts_composition``);
* H2O: min(total, p_ice(T)) over ice (Murphy and Koop 2005).

Warming returns the condensed amount to the gas.  The condensed amounts are
integrated species of the mechanism, ``HNO3_PSC`` (formula HNO3: HNO3 in
NAT or STS) and ``H2O_ICE`` (formula H2O), with no reactions; so element
totals, families and the conservation guard count them, and the result file
shows them beside the gas-phase HNO3 and H2O.

Coupling (docs/heterogeneous.md): the time loop calls
:class:`PhaseEquilibrium` through ``on_accept`` at the start and at the end
of every k(t) window (every output time, at most ``FEEDBACK_INTERVAL_S``
apart), before the surfaces observe the state; it moves molecules between
the gas-phase and the condensed species so that the gas is at equilibrium
(operator splitting with the window as the step: the relaxation time is
instantaneous at each window edge, the gas drifts with the chemistry and T
in between).  Exactly conservative: the sum of each pair is unchanged.

:func:`equilibrium_gas_phase` is a pure array function (members x times),
so a per-member batch can call it on a (members, species) state.
"""
from __future__ import annotations

import numpy as np

from .psc import IceEquilibriumRule, NatEquilibriumRule, ice_vapour_pressure, nat_hno3_equilibrium_pressure
from .sts import StsEquilibriumRule

__all__ = ["CONDENSED_HNO3", "CONDENSED_H2O", "equilibrium_gas_phase", "PhaseEquilibrium",
           "phase_equilibrium_for"]

#: the condensed-phase species (names of the shipped mechanism; mechanism/condensed.py)
from ..mechanism.condensed import CONDENSED_H2O, CONDENSED_HNO3  # noqa: E402


def equilibrium_gas_phase(temperature, pressure_Pa, hno3_total, h2o_total, *, nat: bool = False,
                          ice: bool = False, sts: StsEquilibriumRule | None = None):
    """Gas-phase (HNO3, H2O) mole fractions [mol mol-1] in equilibrium with the particles.

    ``hno3_total``, ``h2o_total``: gas + condensed mole fractions; T [K], p [Pa]
    broadcast against them.  ``ice``: water above the ice vapour pressure
    condenses; ``nat``: HNO3 above the NAT equilibrium pressure at the
    gas-phase p(H2O) condenses; ``sts``: the liquid takes up HNO3 as Carslaw
    et al. (1995) give (not together with ``nat``).
    """
    T = np.asarray(temperature, dtype=float)
    p = np.asarray(pressure_Pa, dtype=float)
    hno3 = np.asarray(hno3_total, dtype=float)
    h2o = np.asarray(h2o_total, dtype=float)
    h2o_gas = np.minimum(h2o, ice_vapour_pressure(T) / p) if ice else h2o
    hno3_gas = hno3
    if nat:
        hno3_gas = np.minimum(hno3, nat_hno3_equilibrium_pressure(T, h2o_gas * p) / p)
    if sts is not None:
        from .sts import sts_composition
        share = sts_composition(T, p, h2o_gas, hno3, sts.h2so4_mole_fraction).hno3_gas_fraction
        hno3_gas = np.minimum(hno3_gas, hno3 * share)
    return hno3_gas, h2o_gas


class PhaseEquilibrium:
    """The time loop's partition step (``on_accept``): y [cm-3] brought to phase equilibrium.

    Built by :func:`phase_equilibrium_for` when the environment has a NAT,
    STS or ice rule and the mechanism declares the matching condensed species.
    ``partition(T, p, air, y)`` works on (n_variable,) or (n_members,
    n_variable) states and returns the new array; calling the object
    ``(t_s, y)`` changes ``y`` in place (the time loop's state) and returns it.
    """

    def __init__(self, environment, variable_species, *, nat: bool, ice: bool, sts):
        index = {name: i for i, name in enumerate(variable_species)}
        self.environment = environment
        self.nat, self.ice, self.sts = bool(nat), bool(ice), sts
        self._hno3 = (index["HNO3"], index[CONDENSED_HNO3]) if (nat or sts is not None) else None
        self._h2o = (index["H2O"], index[CONDENSED_H2O]) if ice else None
        self._h2o_gas_index = index.get("H2O", -1)
        self.calls = 0

    def describe(self) -> str:
        parts = []
        if self.nat:
            parts.append(f"HNO3 over NAT (Hanson and Mauersberger 1988) -> {CONDENSED_HNO3}")
        if self.sts is not None:
            parts.append(f"HNO3 into STS (Carslaw et al. 1995) -> {CONDENSED_HNO3}")
        if self.ice:
            parts.append(f"H2O over ice (Murphy and Koop 2005) -> {CONDENSED_H2O}")
        return "; ".join(parts) + " (equilibrium at every k(t) window edge, docs/heterogeneous.md)"

    def partition(self, T, p, air, y):
        """y [cm-3] ((n_variable,) or (n_members, n_variable)) at equilibrium; T [K], p [Pa], air [cm-3]
        scalars or (n_members,)."""
        y = np.array(y, dtype=float, copy=True)
        air = np.asarray(air, dtype=float)
        x = y / (air[..., None] if air.ndim else air)
        if self._h2o is not None:
            h2o_total = x[..., self._h2o[0]] + x[..., self._h2o[1]]
        elif self._h2o_gas_index >= 0:
            h2o_total = x[..., self._h2o_gas_index]
        else:
            h2o_total = np.zeros(x.shape[:-1])
        hno3_total = (x[..., self._hno3[0]] + x[..., self._hno3[1]]) if self._hno3 is not None else 0.0
        hno3_gas, h2o_gas = equilibrium_gas_phase(T, p, hno3_total, h2o_total, nat=self.nat, ice=self.ice,
                                                  sts=self.sts)
        for pair, gas_x in ((self._hno3, hno3_gas), (self._h2o, h2o_gas)):
            if pair is None:
                continue
            g, c = pair
            total = y[..., g] + y[..., c]              # cm-3: conserved exactly
            gas = np.minimum(total, np.asarray(gas_x) * air)
            y[..., g] = gas
            y[..., c] = total - gas
        return y

    def map_state(self, t_s, y):
        """The time loop's ``state_map``: states y (n_members, n_variable) [cm-3] at t_s [s]
        -> the same states at phase equilibrium (a new array; elementwise over members)."""
        state = self.environment.at(float(t_s))
        self.calls += 1
        return self.partition(float(state.temperature), float(state.pressure),
                              float(state.air_density), y)

    def __call__(self, t_s, y):
        state = self.environment.at(float(t_s))
        new = self.partition(float(state.temperature), float(state.pressure), float(state.air_density), y)
        y[...] = new
        self.calls += 1
        return y


def phase_equilibrium_for(environment, variable_species):
    """A :class:`PhaseEquilibrium` for this environment and mechanism, or None.

    None when no NAT/STS/ice rule is chosen, or when the mechanism lacks the
    condensed species (then the rules read the gas phase as the total, as
    before; runner records which in the result).  A NAT rule together with
    an STS rule is refused (both would hold the same ``HNO3_PSC``).
    """
    from ..errors import ScenarioError
    nat = isinstance(getattr(environment, "psc_area", None), NatEquilibriumRule)
    ice = isinstance(getattr(environment, "ice_area", None), IceEquilibriumRule)
    sts = getattr(environment, "sulfate_area", None)
    sts = sts if isinstance(sts, StsEquilibriumRule) else None
    if nat and sts is not None:
        raise ScenarioError("[environment].psc_surface_area rule \"nat\" and [environment].sulfate_surface_area "
                            "rule \"sts\" both hold the condensed HNO3; choose one (valid: NAT with liquid "
                            "binary sulfate, or STS without NAT: psc_surface_area = \"0 um2 cm-3\")")
    names = set(variable_species)
    nat_ok = (nat or sts is not None) and {"HNO3", CONDENSED_HNO3} <= names
    ice_ok = ice and {"H2O", CONDENSED_H2O} <= names
    if not (nat_ok or ice_ok):
        return None
    return PhaseEquilibrium(environment, variable_species, nat=nat and nat_ok, ice=ice_ok,
                            sts=sts if nat_ok else None)
