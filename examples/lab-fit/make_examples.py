"""Write the SYNTHETIC example data of examples/lab-fit/ (invented numbers, demo only).

Run from the repository root:  python examples/lab-fit/make_examples.py
Every "true" parameter below is invented for the demonstration (near, but on
purpose not equal to, the shipped mechanism's values); the noise is Gaussian
with a fixed seed, so the files are reproducible.  Closed forms used:
Arrhenius and the termolecular falloff form (boxchem.mechanism.ratelaws),
1/[A] = 1/[A]0 + 2kt for the self-reaction, S0 exp(-k't) + b for the
pseudo-first-order decays (common practice, no source).
"""
from pathlib import Path

import numpy as np

from boxchem.environment.atmosphere import air_number_density
from boxchem.mechanism.ratelaws import arrhenius, equilibrium_constant, termolecular_falloff

HERE = Path(__file__).resolve().parent
HEADER = "# SYNTHETIC data for the boxchem lab-fit example: invented parameters + noise, not a measurement\n"
TORR = 101325.0 / 760.0
rng = np.random.default_rng(20261202)


def arrhenius_table():
    # invented truth: A = 2.6e-11, E/R = 230 K; 5 % (1 sigma) scatter, one point 25 % off (an outlier)
    T = np.array([200, 210, 220, 230, 240, 250, 260, 270, 285, 298, 310, 320.0])
    k = arrhenius(T, 2.6e-11, 230.0) * np.exp(rng.normal(0, 0.05, T.size))
    k[4] *= 1.25
    rows = [f"{t:.0f}, {kk / 1e-12:.4f}, 5, N2, flash photolysis run {i + 1}" for i, (t, kk) in enumerate(zip(T, k))]
    text = (HEADER + "# Cl + O3 -> ClO + O2 (comma separated; k in units of 1e-12 cm3 molecule-1 s-1)\n"
            "# uncertainty: relative, 1 sigma\n"
            "T [K], k [1e-12 cm3 molecule-1 s-1], k_err [%], bath, note\n" + "\n".join(rows) + "\n")
    (HERE / "cl_o3_lab.csv").write_text(text)


def falloff_table():
    # invented truth: k0 = 2.0e-32 (T/300)^-3.8, kinf = 3.4e-12 (T/300)^-1.8, Fc = 0.6, N2; 6 % scatter
    rows = []
    for T in (200.0, 220.0, 250.0, 280.0, 300.0):
        for p_torr in (5, 15, 50, 150, 400, 700):
            M = air_number_density(p_torr * TORR, T)
            k = termolecular_falloff(T, M, 2.0e-32, 3.8, 3.4e-12, 1.8) * np.exp(rng.normal(0, 0.06))
            rows.append(f"{T:.0f}\t{p_torr}\t{k:.4e}\t{0.06 * k:.2e}\tN2")
    text = (HEADER + "# ClO + ClO + M -> Cl2O2 + M (tab separated; effective second-order k)\n"
            "# uncertainty: absolute, 1 sigma\n"
            "T [K]\tp [Torr]\tk [cm3 molecule-1 s-1]\tk_err [cm3 molecule-1 s-1]\tbath gas\n"
            + "\n".join(rows) + "\n")
    (HERE / "clo_clo_m_lab.tsv").write_text(text)


def equilibrium_table():
    # invented truth: K = 2.0e-27 exp(8600/T) cm3; k_forward from the falloff above at 100 Torr
    rows = []
    for T in (230.0, 240.0, 250.0, 260.0, 270.0, 280.0, 290.0, 300.0):
        M = air_number_density(100 * TORR, T)
        kf = termolecular_falloff(T, M, 2.0e-32, 3.8, 3.4e-12, 1.8) * np.exp(rng.normal(0, 0.05))
        kr = kf / equilibrium_constant(T, 2.0e-27, 8600.0) * np.exp(rng.normal(0, 0.08))
        rows.append(f"{T:6.1f}   {kf:.4e}   10 {kr:10.4e}   16")
    text = (HEADER + "# ClO + ClO + M <-> Cl2O2 + M at 100 Torr N2 (space separated)\n"
            "# uncertainties: relative, 2 sigma (see the unit brackets)\n"
            "T [K]   k_forward [cm3 molecule-1 s-1]   k_forward_err [% 2 sigma]   k_reverse [s-1]   "
            "k_reverse_err [% 2 sigma]\n" + "\n".join(rows) + "\n")
    (HERE / "cl2o2_equilibrium_lab.txt").write_text(text)


def second_order_traces():
    # ClO + ClO + M self-reaction traces (falloff truth as above), ClO absorbance, invented
    # cross section 5.0e-18 cm2 (5 % uncertainty), 80 cm path, noise 2e-4 absorbance units
    sigma, L = 5.0e-18, 80.0
    for T in (220.0, 250.0, 280.0):
        for p_torr in (50, 200, 700):
            M = air_number_density(p_torr * TORR, T)
            k = termolecular_falloff(T, M, 2.0e-32, 3.8, 3.4e-12, 1.8)
            a0 = 6.0e13 * rng.uniform(0.8, 1.2)
            t_end = 6.0 / (2 * k * a0)
            t = np.linspace(-0.05 * t_end, t_end, 240)
            conc = np.where(t > 0, a0 / (1 + 2 * k * a0 * np.clip(t, 0, None)), 0.0)
            absorb = sigma * L * conc + rng.normal(0, 2e-4, t.size)
            lines = [f"{ti * 1e3:.4f}, {ai:.6f}" for ti, ai in zip(t, absorb)]
            text = (HEADER + "# ClO decay after the flash (second order); conditions, then the trace\n"
                    "kind = second-order\nspecies = ClO\n"
                    f"T = {T:.0f} K\np = {p_torr} Torr\nbath = N2\n"
                    f"cross_section = {sigma:.2e} cm2\ncross_section_uncertainty = 5 %\n"
                    f"path_length = {L:.0f} cm\n"
                    "t [ms], absorbance [base e]\n" + "\n".join(lines) + "\n")
            (HERE / "traces" / f"clo_{T:.0f}K_{p_torr}torr.csv").write_text(text)


def pseudo_first_order_traces():
    # Cl + O3 with O3 in excess: Cl resonance-fluorescence signal (arbitrary units), invented truth
    # k = 2.6e-11 exp(-230/T), first-order background loss 60 s-1, baseline 20 counts, noise 3 %
    for T in (220.0, 260.0, 298.0):
        k = arrhenius(T, 2.6e-11, 230.0)
        for o3 in (1.0e13, 2.5e13, 5.0e13, 8.0e13):
            kp = k * o3 + 60.0
            t = np.linspace(-0.5 / kp, 6.0 / kp, 200)
            s = np.where(t > 0, 1000.0 * np.exp(-kp * np.clip(t, 0, None)), 0.0) + 20.0
            s = s + rng.normal(0, 0.03 * 1000.0 * 0.3, t.size)
            lines = [f"{ti * 1e6:10.2f}  {si:9.3f}" for ti, si in zip(t, s)]
            text = (HEADER + "# Cl decay in excess O3 (pseudo first order); space separated\n"
                    "kind = pseudo-first-order\nspecies = Cl\n"
                    f"T = {T:.0f} K\np = 50 Torr\nbath = N2\nco_reactant = {o3:.2e} cm-3\n"
                    "t [us]   signal [arb]\n" + "\n".join(lines) + "\n")
            (HERE / "traces" / f"cl_o3_{T:.0f}K_{o3:.1e}.txt".replace("+", "")).write_text(text)


if __name__ == "__main__":
    arrhenius_table()
    falloff_table()
    equilibrium_table()
    second_order_traces()
    pseudo_first_order_traces()
