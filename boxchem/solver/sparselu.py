"""Symbolic sparse LU of the Rosenbrock matrix W = I/(h gamma) - J, once per mechanism.

The Jacobian of a mechanism has a fixed pattern (which species a reaction
couples never changes), so ordering, fill-in and the list of elimination
operations are computed here once; the compiled kernels
(:mod:`boxchem.solver.compiled`) then factor and solve W at every step by
running through those lists without looking at a zero (the approach of
Sandu, Potra, Carmichael and Damian 1996, "Efficient implementation of fully
implicit methods for atmospheric chemical kinetics", J. Comput. Phys. 129,
101-110: symbolic preprocessing and an LU without pivoting on the fixed
pattern).  Without row exchanges the elimination follows the pattern; W's
diagonal 1/(h gamma) - J_ii is large and positive for the short steps of
stiff chemistry (loss terms make J_ii <= 0), so static pivots are safe in
practice, and the kernel checks every pivot against its row and falls back to
the dense LU with partial pivoting when one is too small.

Order: minimum degree on the symmetrised pattern (Tinney and Walker 1967,
Proc. IEEE 55, 1801; George and Liu 1989, SIAM Rev. 31, 1), compared with the
simple sort by degree, and the one with fewer elimination operations is kept.

Storage: the pattern of L + U (unit L below the diagonal, U on and above it)
in compressed rows of the permuted matrix, ``ptr``/``col`` with ``diag`` the
position of each diagonal entry.  Elimination operations (row i, pivot k):
``l_pos[e]`` (entry (i, k)), ``l_pivot[e]`` (the diagonal (k, k)) and the
updates ``a[op_dst] -= l * a[op_src]`` for ``op_ptr[e]:op_ptr[e+1]``, listed
row by row in increasing k (the row-oriented "ikj" Doolittle variant;
Golub and Van Loan 2013, Matrix Computations, 3.2).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["SparseLUStructure", "sparse_lu_structure", "minimum_degree_order", "degree_order",
           "symbolic_factorisation"]


@dataclass(frozen=True)
class SparseLUStructure:
    """Pattern and elimination lists of the sparse LU (module docstring)."""

    n: int
    perm: np.ndarray        # permuted row/column i is species perm[i]
    ptr: np.ndarray         # (n + 1,) row pointers into col
    col: np.ndarray         # (nnz,) column of each stored entry (permuted numbering)
    diag: np.ndarray        # (n,) position of the diagonal in each row
    jac_pos: np.ndarray     # position in the value array of each Jacobian scatter triplet
    l_pos: np.ndarray       # (n_l,) entries (i, k) of L, in elimination order
    l_pivot: np.ndarray     # (n_l,) position of (k, k)
    op_ptr: np.ndarray      # (n_l + 1,)
    op_src: np.ndarray      # position of (k, j) ...
    op_dst: np.ndarray      # ... and of (i, j), j > k
    order_name: str

    @property
    def nnz(self) -> int:
        return int(self.col.size)

    @property
    def operations(self) -> int:
        """Multiply-adds of one factorisation (divisions not counted)."""
        return int(self.op_src.size)

    def arrays(self) -> tuple:
        """The arrays in the order the compiled kernels take them."""
        return tuple(np.ascontiguousarray(a, dtype=np.uint64) for a in (
            self.perm, self.ptr, self.col, self.diag, self.l_pos, self.l_pivot, self.op_ptr,
            self.op_src, self.op_dst))

    @property
    def jac_pos_unsigned(self) -> np.ndarray:
        return np.ascontiguousarray(self.jac_pos, dtype=np.uint64)


def _pattern(kinetics) -> np.ndarray:
    """Boolean (n, n) pattern of J plus the diagonal, in species order."""
    nv = kinetics.n_variable
    pattern = np.eye(nv, dtype=bool)
    pattern.flat[np.asarray(kinetics._jac_rows, dtype=np.int64)] = True
    return pattern


def degree_order(pattern: np.ndarray) -> np.ndarray:
    """Fewest non-zeros (row + column) first (the earlier compiled loop's order)."""
    degree = pattern.sum(axis=0) + pattern.sum(axis=1)
    return np.argsort(degree, kind="stable").astype(np.int64)


def minimum_degree_order(pattern: np.ndarray) -> np.ndarray:
    """Minimum-degree elimination order of the graph of ``pattern | pattern.T``.

    Eliminating a node joins its neighbours into a clique; the next node is
    one of least current degree (ties: the lower index).  Setup-time code:
    quadratic in n, milliseconds for a few hundred species.
    """
    n = pattern.shape[0]
    sym = pattern | pattern.T
    neighbours = [set(np.nonzero(sym[i])[0].tolist()) - {i} for i in range(n)]
    alive = set(range(n))
    order = []
    while alive:
        v = min(alive, key=lambda x: (len(neighbours[x]), x))
        nb = neighbours[v]
        for a in nb:
            neighbours[a] |= nb
            neighbours[a].discard(a)
            neighbours[a].discard(v)
        alive.discard(v)
        order.append(v)
    return np.asarray(order, dtype=np.int64)


def symbolic_factorisation(pattern: np.ndarray, perm: np.ndarray):
    """Rows of the filled pattern (sorted column lists, permuted numbering) and the op count."""
    p = pattern[np.ix_(perm, perm)]
    n = p.shape[0]
    rows = []
    upper = []                       # columns > i of each finished row
    ops = 0
    for i in range(n):
        cols = set(np.nonzero(p[i])[0].tolist())
        k = 0
        while k < i:
            if k in cols:
                cols |= upper[k]
                ops += len(upper[k])
            k += 1
        ordered = sorted(cols)
        rows.append(ordered)
        upper.append({c for c in ordered if c > i})
    return rows, ops


def sparse_lu_structure(kinetics) -> SparseLUStructure:
    """The sparse LU structure of a :class:`CompiledKinetics` (cached on it)."""
    cached = getattr(kinetics, "_sparse_lu", None)
    if cached is not None:
        return cached
    pattern = _pattern(kinetics)
    n = pattern.shape[0]
    best = None
    for name, order in (("minimum degree", minimum_degree_order(pattern)),
                        ("degree sort", degree_order(pattern))):
        rows, ops = symbolic_factorisation(pattern, order)
        if best is None or ops < best[2]:
            best = (name, order, ops, rows)
    name, perm, _, rows = best
    ptr = np.zeros(n + 1, dtype=np.int64)
    for i, r in enumerate(rows):
        ptr[i + 1] = ptr[i] + len(r)
    col = np.concatenate([np.asarray(r, dtype=np.int64) for r in rows]) if n else np.zeros(0, np.int64)
    where = {}
    for i, r in enumerate(rows):
        for q, c in enumerate(r):
            where[(i, c)] = int(ptr[i]) + q
    diag = np.array([where[(i, i)] for i in range(n)], dtype=np.int64)
    inverse = np.empty(n, dtype=np.int64)
    inverse[perm] = np.arange(n)
    flat = np.asarray(kinetics._jac_rows, dtype=np.int64)
    jac_pos = np.array([where[(int(inverse[f // n]), int(inverse[f % n]))] for f in flat],
                       dtype=np.int64)
    l_pos, l_pivot, op_ptr, op_src, op_dst = [], [], [0], [], []
    for i, r in enumerate(rows):
        for k in r:
            if k >= i:
                break
            l_pos.append(where[(i, k)])
            l_pivot.append(int(diag[k]))
            for j in rows[k]:
                if j > k:
                    op_src.append(where[(k, j)])
                    op_dst.append(where[(i, j)])
            op_ptr.append(len(op_src))
    as64 = (lambda v: np.asarray(v, dtype=np.int64))
    structure = SparseLUStructure(n, perm.astype(np.int64), ptr, col, diag, jac_pos, as64(l_pos),
                                  as64(l_pivot), as64(op_ptr), as64(op_src), as64(op_dst), name)
    kinetics._sparse_lu = structure
    return structure
