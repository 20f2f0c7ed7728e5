"""Mechanism -> compiled mass-action kinetics: reaction rates, RHS and analytic Jacobian.

The mechanism is compiled once into integer index arrays and stoichiometry
matrices; every call afterwards is a handful of numpy operations over all
reactions at once (no Python loop over reactions or species).

Concentration vector
--------------------
Internally the kernels work on one extended vector per box::

    c = [ y (variable species) | fixed species | 1 ]

The trailing constant-one slot pads the reactant table: a reaction with fewer
reactant slots than the widest one points its spare slots at the one slot.

Rate expression (molecule cm-3 units)
-------------------------------------
* mass action: ``rate = k * prod_i c_i ** nu_i`` over the reactants, integer
  coefficients expanded into repeated slots (``ClO + ClO`` and ``2 ClO`` give
  ``k [ClO]^2``; the loss of ClO is 2 per reaction through the stoichiometry);
* ``[M]`` is one more slot when ``Reaction.air_multiplies_rate``;
* surface reactions (law ``surface``): first order in the first reactant;
  each further reactant that is a variable species consumed by the reaction
  multiplies the rate by ``B / (B + B_half)`` with
  ``B_half = SURFACE_COREACTANT_HALF`` (see DEVELOPERS.md, "Surface keys").
  Fixed co-reactants (e.g. H2O held fixed) do not enter the rate: the uptake
  coefficient already describes the reactive surface.

Shapes: ``y`` is ``(..., n_variable)``, ``k`` is ``(..., n_reactions)``,
``fixed`` is ``(..., n_fixed)``; leading (batch / ensemble member) dimensions
broadcast.  ``jacobian`` returns ``(..., n_variable, n_variable)``.

Dense Jacobian storage: measured on this machine (scipy 1.17, numpy 2.4, a
shared 2-core box) with 10 % fill, one factorisation and three solves (one
Rosenbrock step) cost: n = 60: dense ``scipy.linalg.lu_factor`` 63 us, sparse
``scipy.sparse.linalg.splu`` 290 us; n = 100: 110 vs 580 us; n = 150: 250 vs
1170 us.  The sparse path pays for CSC conversion and per-call overhead that
small chemistry systems never win back, so the Jacobian is assembled as a
dense array (through a sparse scatter matrix built at compile time).  The
compiled time loop does not use these kernels: it writes the Jacobian into
the pattern of its own fixed-pattern sparse LU (``sparselu``), which has no
per-call overhead.

For a later tangent-linear / sensitivity mode: ``rates`` is linear in ``k``,
so d(rhs)/d(k_r) is ``stoichiometry[:, r] * rates_r / k_r``, available from
``rates(y, ones, fixed)`` without a new kernel.
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from ..errors import MechanismError
from ..mechanism.model import Mechanism

from ..mechanism.ratelaws import SURFACE_COREACTANT_HALF  # DEVELOPERS.md, "Surface keys"

__all__ = ["CompiledKinetics", "SURFACE_COREACTANT_HALF"]

_ONE = np.ones(1)


class CompiledKinetics:
    """Index/stoichiometry arrays of a mechanism and the kernels that use them.

    Attributes
    ----------
    variable_species, fixed_species : tuple[str, ...]
        Names in the order of ``y`` and ``fixed``.  ``fixed_species`` always
        contains ``"M"`` (appended when the mechanism does not declare it).
    reaction_ids : tuple[str, ...]
        Order of ``k`` and of ``rates``.
    stoichiometry : scipy.sparse.csr_matrix (n_variable, n_reactions)
        Net production (products minus reactants) of each variable species.
    """

    def __init__(self, mechanism: Mechanism):
        self.mechanism = mechanism
        self.variable_species = tuple(s.name for s in mechanism.variable_species)
        fixed = [s.name for s in mechanism.fixed_species]
        if "M" not in fixed:
            fixed.append("M")
        self.fixed_species = tuple(fixed)
        self.reaction_ids = tuple(r.id for r in mechanism.reactions)
        nv, nf, nr = len(self.variable_species), len(self.fixed_species), len(self.reaction_ids)
        self.n_variable, self.n_fixed, self.n_reactions = nv, nf, nr
        self._one = nv + nf  # index of the constant-one slot in c
        index = {name: i for i, name in enumerate(self.variable_species)}
        index.update({name: nv + i for i, name in enumerate(self.fixed_species)})
        self._air_index = index["M"]
        #: position of M in ``fixed`` (the air number density)
        self.air_fixed_index = self._air_index - nv
        self._compile(mechanism, index)

    # -- compilation ------------------------------------------------------------
    def _compile(self, mechanism: Mechanism, index: dict[str, int]) -> None:
        nv, nr = self.n_variable, self.n_reactions
        mass_slots: list[list[int]] = []
        sat_slots: list[list[int]] = []
        net = np.zeros((nv, nr))
        for r, reaction in enumerate(mechanism.reactions):
            for term in reaction.reactants:
                if term.species not in index:
                    raise MechanismError(f"reaction '{reaction.id}': reactant '{term.species}' "
                                         f"is not a declared species")
                if term.species in index and index[term.species] < nv:
                    net[index[term.species], r] -= term.coefficient
            for term in reaction.products:
                if term.species not in index:
                    raise MechanismError(f"reaction '{reaction.id}': product '{term.species}' "
                                         f"is not a declared species")
                if index[term.species] < nv:
                    net[index[term.species], r] += term.coefficient
            slots: list[int] = []
            sats: list[int] = []
            if reaction.law in ("surface", "uptake"):   # model.SURFACE_LAWS
                if reaction.reactants:
                    slots.append(index[reaction.reactants[0].species])
                for term in reaction.reactants[1:]:
                    j = index[term.species]
                    if j < nv and net[j, r] < 0:
                        sats.append(j)
            else:
                for term in reaction.reactants:
                    n = float(term.coefficient)
                    if n != round(n) or n < 1:
                        raise MechanismError(
                            f"reaction '{reaction.id}': reactant coefficient {n:g} of "
                            f"'{term.species}' cannot enter a mass-action rate; valid: "
                            f"positive whole numbers (write fractions on the product side)")
                    slots.extend([index[term.species]] * int(round(n)))
                if reaction.air_multiplies_rate:
                    slots.append(self._air_index)
            mass_slots.append(slots)
            sat_slots.append(sats)
        width = max([1] + [len(s) for s in mass_slots])
        swidth = max([0] + [len(s) for s in sat_slots])
        self._mass = np.full((nr, width), self._one, dtype=np.intp)
        for r, s in enumerate(mass_slots):
            self._mass[r, :len(s)] = s
        self._sat = np.full((nr, swidth), self._one, dtype=np.intp)
        self._sat_half = np.zeros((nr, swidth))
        for r, s in enumerate(sat_slots):
            self._sat[r, :len(s)] = s
            self._sat_half[r, :len(s)] = SURFACE_COREACTANT_HALF
        # Products over "all slots but one" (for the Jacobian) without division,
        # so that zero concentrations give exact derivatives.
        self._others = np.array([[q for q in range(width) if q != p] for p in range(width)],
                                dtype=np.intp).reshape(width, width - 1)
        self._mass_cols = [self._mass[:, p].copy() for p in range(width)]
        self._sat_cols = [self._sat[:, p].copy() for p in range(swidth)]
        self._sat_half_cols = [self._sat_half[:, p].copy() for p in range(swidth)]
        self.stoichiometry = sp.csr_matrix(net)
        self._stoich_dense = net
        self._jac_scatter = self._build_jacobian_scatter(net, width, swidth)

    def _build_jacobian_scatter(self, net: np.ndarray, width: int, swidth: int) -> sp.csr_matrix:
        """Sparse map from d(rate_r)/d(slot) values to the flattened dense Jacobian.

        Entry (i * nv + j, r * nslot + p) = net[i, r] when slot p of reaction r
        refers to variable species j.  Repeated slots (2 ClO) add up.
        """
        nv, nr = self.n_variable, self.n_reactions
        nslot = width + swidth
        slot_species = np.concatenate([self._mass, self._sat], axis=1)  # (nr, nslot)
        rr, pp = np.nonzero(slot_species < nv)
        jj = slot_species[rr, pp]
        rows, cols, vals = [], [], []
        net_csc = sp.csc_matrix(net)
        for r_, p_, j_ in zip(rr, pp, jj):  # compile time only
            lo, hi = net_csc.indptr[r_], net_csc.indptr[r_ + 1]
            ii = net_csc.indices[lo:hi]
            rows.append(ii * nv + j_)
            cols.append(np.full(ii.shape, r_ * nslot + p_))
            vals.append(net_csc.data[lo:hi])
        if rows:
            rows_a, cols_a, vals_a = map(np.concatenate, (rows, cols, vals))
        else:
            rows_a = cols_a = np.zeros(0, dtype=np.intp)
            vals_a = np.zeros(0)
        self.jacobian_nonzeros = len(np.unique(rows_a))
        self._jac_rows, self._jac_cols, self._jac_vals = rows_a.astype(np.intp), cols_a.astype(np.intp), vals_a
        return sp.csr_matrix((vals_a, (rows_a, cols_a)), shape=(nv * nv, nr * nslot))

    # -- helpers ----------------------------------------------------------------
    def fixed_number_densities(self, air_density, mole_fractions=None) -> np.ndarray:
        """Fixed-species number densities [cm-3] from the air number density [cm-3].

        M is the air density; other fixed species are ``mole_fraction * [M]``,
        the mole fraction taken from ``mole_fractions`` (name -> value) first,
        then from the mechanism's declaration.
        """
        air = np.asarray(air_density, dtype=float)
        given = dict(mole_fractions or {})
        fractions = np.empty(self.n_fixed)
        for i, name in enumerate(self.fixed_species):
            if name == "M":
                fractions[i] = 1.0
                continue
            x = given.get(name)
            if x is None:
                x = self.mechanism.species_by_name(name).mole_fraction
            if x is None:
                raise MechanismError(
                    f"fixed species '{name}' has no mole fraction: declare one in the "
                    f"mechanism (e.g. '{name} fixed 0.2095') or give it in the scenario")
            fractions[i] = float(x)
        return air[..., None] * fractions

    def _extended(self, y, fixed) -> np.ndarray:
        y = np.asarray(y, dtype=float)
        fixed = np.asarray(fixed, dtype=float)
        if y.ndim == 1 and fixed.ndim == 1:  # the single-box hot path
            return np.concatenate((y, fixed, _ONE))
        shape = np.broadcast_shapes(y.shape[:-1], fixed.shape[:-1])
        one = np.ones(shape + (1,))
        return np.concatenate([np.broadcast_to(y, shape + y.shape[-1:]),
                               np.broadcast_to(fixed, shape + fixed.shape[-1:]), one], axis=-1)

    # -- kernels ------------------------------------------------------------------
    def rates(self, y, k, fixed) -> np.ndarray:
        """Reaction rates [cm-3 s-1], shape ``(..., n_reactions)``."""
        c = self._extended(y, fixed)
        if c.ndim == 1 and np.ndim(k) == 1:
            return self._rates_single(c, np.asarray(k, dtype=float))
        rate = np.asarray(k, dtype=float) * np.prod(c[..., self._mass], axis=-1)
        if self._sat.shape[1]:
            rate = rate * np.prod(_saturation(c[..., self._sat], self._sat_half), axis=-1)
        return rate

    def rhs(self, y, k, fixed) -> np.ndarray:
        """d y / d t [cm-3 s-1] = stoichiometry @ rates (production minus loss)."""
        rate = self.rates(y, k, fixed)
        if rate.ndim == 1:  # single box: a small dense mat-vec beats the sparse call overhead
            return self._stoich_dense @ rate
        flat = rate.reshape(-1, self.n_reactions)
        out = (self.stoichiometry @ flat.T).T
        return out.reshape(rate.shape[:-1] + (self.n_variable,))

    def production_loss(self, y, k, fixed) -> tuple[np.ndarray, np.ndarray]:
        """Gross production and loss [cm-3 s-1] of each variable species (rhs = P - L)."""
        rate = self.rates(y, k, fixed)
        pos = np.clip(self._stoich_dense, 0, None)
        neg = np.clip(-self._stoich_dense, 0, None)
        return rate @ pos.T, rate @ neg.T

    # Single-box paths: the same formulas with the slot loop unrolled over columns
    # (a handful of slots, never the reactions), which avoids the fancy-indexed
    # (n_reactions, width) temporaries and reductions of the general path; the
    # solver calls these thousands of times per simulated day.
    def _rates_single(self, c, k):
        rate = k * c[self._mass_cols[0]]
        for col in self._mass_cols[1:]:
            rate = rate * c[col]
        for col, half in zip(self._sat_cols, self._sat_half_cols):
            b = c[col]
            rate = rate * (b / (b + half))
        return rate

    def _jacobian_single(self, c, k):
        mass = [c[col] for col in self._mass_cols]
        sat_b = [c[col] for col in self._sat_cols]
        sat = [b / (b + half) for b, half in zip(sat_b, self._sat_half_cols)]
        sat_prod = k.copy()
        for v in sat:
            sat_prod = sat_prod * v
        d = np.empty((self.n_reactions, len(mass) + len(sat)))
        for p in range(len(mass)):
            v = sat_prod
            for q, m in enumerate(mass):
                if q != p:
                    v = v * m
            d[:, p] = v
        if sat:
            mass_prod = k.copy()
            for m in mass:
                mass_prod = mass_prod * m
            for p, (b, half) in enumerate(zip(sat_b, self._sat_half_cols)):
                v = mass_prod * (half / (b + half) ** 2)
                for q, other in enumerate(sat):
                    if q != p:
                        v = v * other
                d[:, len(mass) + p] = v
        # float even without reactions (bincount of an empty array is int, weights or not)
        flat = np.bincount(self._jac_rows, weights=self._jac_vals * d.ravel()[self._jac_cols],
                           minlength=self.n_variable ** 2).astype(float, copy=False)
        return flat.reshape(self.n_variable, self.n_variable)

    def jacobian(self, y, k, fixed) -> np.ndarray:
        """Analytic d(rhs_i)/d(y_j) [s-1], dense, shape ``(..., n_variable, n_variable)``."""
        c = self._extended(y, fixed)
        k = np.asarray(k, dtype=float)
        if c.ndim == 1 and k.ndim == 1:
            return self._jacobian_single(c, k)
        lead = np.broadcast_shapes(c.shape[:-1], k.shape[:-1])
        mass = c[..., self._mass]                                    # (..., nr, width)
        sat_b = c[..., self._sat]                                    # (..., nr, swidth)
        sat = _saturation(sat_b, self._sat_half)
        sat_prod = np.prod(sat, axis=-1)                             # (..., nr)
        mass_prod = np.prod(mass, axis=-1)
        # d rate / d mass slot p = k * prod_{q != p} mass_q * prod sat
        d_mass = np.prod(mass[..., self._others], axis=-1) if self._others.shape[1] else \
            np.ones_like(mass)
        d_mass = d_mass * (k * sat_prod)[..., None]
        parts = [np.broadcast_to(d_mass, lead + d_mass.shape[-2:])]
        if self._sat.shape[1]:
            sw = self._sat.shape[1]
            others = np.array([[q for q in range(sw) if q != p] for p in range(sw)],
                              dtype=np.intp).reshape(sw, sw - 1)
            sat_others = np.prod(sat[..., others], axis=-1) if sw > 1 else np.ones_like(sat)
            d_sat = _saturation_derivative(sat_b, self._sat_half) * sat_others
            d_sat = d_sat * (k * mass_prod)[..., None]
            parts.append(np.broadcast_to(d_sat, lead + d_sat.shape[-2:]))
        d = np.concatenate(parts, axis=-1).reshape(-1, self._jac_scatter.shape[1])
        if d.shape[0] == 1 and not lead:  # single box: scatter-add with bincount
            flat = np.bincount(self._jac_rows, weights=self._jac_vals * d[0, self._jac_cols],
                               minlength=self.n_variable ** 2).astype(float, copy=False)
            return flat.reshape(self.n_variable, self.n_variable)
        flat = (self._jac_scatter @ d.T).T
        return flat.reshape(lead + (self.n_variable, self.n_variable))


def _saturation(b: np.ndarray, half: np.ndarray) -> np.ndarray:
    """B / (B + B_half); padding slots have half = 0 and point at the one slot (-> 1)."""
    return b / (b + half)


def _saturation_derivative(b: np.ndarray, half: np.ndarray) -> np.ndarray:
    """d/dB [B / (B + B_half)] = B_half / (B + B_half)^2."""
    return half / (b + half) ** 2
