"""A first-order chain A -> B -> C as a scenario, shared by the sensitivity and uncertainty tests.

Its solution is closed form (Bateman 1910, Proc. Cambridge Phil. Soc. 15, 423, for a
two-member decay chain; common textbook kinetics):

    A(t) = A0 e^{-k1 t},  B(t) = A0 k1/(k2 - k1) (e^{-k1 t} - e^{-k2 t}),  C = A0 - A - B

The rate coefficients are invented test values, not data.
"""
from __future__ import annotations

import numpy as np

K1, K2 = 1.0e-4, 3.0e-5          # s-1, invented
A0 = 1.0e-6                       # mol mol-1, invented
HOURS = 10

CHAIN_MECH = """\
[species]
M fixed
A lumped
B lumped
C lumped
[families]
AB = A + B
[reactions]
a_to_b  A -> B   arrhenius A=1.0e-4  f298=1.2 g=100  ref="invented test value"
b_to_c  B -> C   arrhenius A=3.0e-5  f298=1.5        ref="invented test value"
[cycles]
conversion destroys AB = b_to_c
"""

CHAIN_SCENARIO = """\
[run]
mechanism = "chain.mech"
start = "2026-01-01T00:00:00Z"
duration = "10 h"
output_interval = "1 h"
[location]
latitude = 0.0
longitude = 0.0
altitude = "20 km"
[environment]
temperature = "{temperature}"
pressure = "50 hPa"
[initial]
A = "1 ppmv"
[solver]
rtol = {rtol}
atol = "1e-6 cm-3"
"""


def write_chain(folder, *, temperature="220 K", rtol=1e-10, name="chain.toml"):
    folder.joinpath("chain.mech").write_text(CHAIN_MECH)
    path = folder / name
    path.write_text(CHAIN_SCENARIO.format(temperature=temperature, rtol=rtol))
    return path


def chain_b(t, k1=K1, k2=K2):
    return A0 * k1 / (k2 - k1) * (np.exp(-k1 * t) - np.exp(-k2 * t))


def chain_db(t, k1=K1, k2=K2):
    """(dB/dk1, dB/dk2) of the closed form [mol mol-1 s]."""
    e1, e2, d = np.exp(-k1 * t), np.exp(-k2 * t), k2 - k1
    db1 = A0 * (k2 / d ** 2 * (e1 - e2) - k1 / d * t * e1)
    db2 = A0 * (-k1 / d ** 2 * (e1 - e2) + k1 / d * t * e2)
    return db1, db2
