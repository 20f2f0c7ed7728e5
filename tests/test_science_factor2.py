"""Science checks tight enough that a factor-2 error in a key rate, J or gamma fails (issue 11, item 6).

Each check names its source beside it.  ``benchmarks/factor2_check.py``
multiplies each key quantity by 2 and by 0.5 in turn (tests/perturb_plugin.py)
and reports which of these tests fail; its output is in docs/heterogeneous.md.

Where a reference value is recalled from memory rather than read from the
source, the comment says so: the search tool indexes each stored page by its
beginning only, so the JPL evaluations (97-4, 00-3 and others are stored) and
the IUPAC summary return their title pages and tables of contents, never a
table row (searched 2026-12-02, about 50 phrasings).  Values found in the
abstracts of laboratory measurements are used where they exist, with the
uncertainty the abstract states.  Tolerances are the evaluation's own
uncertainty factor f(T) = f298 exp(|g (1/T - 1/298)|) where one is given, and
never looser than a factor 1.5, so that a factor of 2 always fails.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

import boxchem
from boxchem.environment.atmosphere import air_number_density
from boxchem.mechanism import load_mechanism
from boxchem.mechanism.liquid_aerosol import liquid_gammas
from boxchem.mechanism.ratelaws import RateEvaluator


@pytest.fixture(scope="module")
def mech():
    return load_mechanism("stratosphere")


@pytest.fixture(scope="module")
def evaluator(mech):
    return RateEvaluator(mech)


def _uncertainty(f298, g, T):
    # the evaluated-data tables' convention (JPL 19-5 section 1; CONTRACTS.md)
    return f298 * math.exp(abs(g * (1.0 / T - 1.0 / 298.0)))


def _k(evaluator, mech, rid, T, pressure_Pa=5000.0):
    M = air_number_density(pressure_Pa, T)
    return float(evaluator.thermal(T, M)[mech.reaction_ids.index(rid)])


def _jpl_falloff(T, M, k0_300, n, kinf_300, m):
    # JPL 19-5 section 2 termolecular form, written out here independently of ratelaws.py:
    # k0(T) = k0(300) (T/300)^-n, kinf(T) = kinf(300) (T/300)^-m, Fc = 0.6
    k0 = k0_300 * (T / 300.0) ** -n * M
    kinf = kinf_300 * (T / 300.0) ** -m
    x = k0 / kinf
    return k0 / (1 + x) * 0.6 ** (1 / (1 + math.log10(x) ** 2))


# ---------------------------------------------------------------- rate coefficients
@pytest.mark.parametrize("T", [200.0, 230.0, 298.0])
def test_cl_o3_against_jpl(evaluator, mech, T):
    # JPL 19-5 Table 1A: Cl + O3, A = 2.3e-11, E/R = 200 K, f298 = 1.15, g = 100
    # (recalled from memory: searches for the JPL 19-5 / 97-4 / IUPAC table rows returned only the
    # documents' title pages; the IUPAC expression differs by < 15 % here, recalled).  The found
    # measurement is checked in test_cl_o3_against_beach_2002_measurement below.
    ref = 2.3e-11 * math.exp(-200.0 / T)
    ratio = _k(evaluator, mech, "cl_o3", T) / ref
    assert 1 / _uncertainty(1.15, 100, T) < ratio < _uncertainty(1.15, 100, T)


@pytest.mark.parametrize("T", [184.0, 200.0, 250.0, 298.0])
def test_cl_o3_against_beach_2002_measurement(evaluator, mech, T):
    # Found by search: Beach, Smith and Tuckett (2002), "Rate constants for the reaction of Cl atoms
    # with O3 at temperatures from 298 to 184 K", Int. J. Chem. Kinet. 34, 104-109,
    # doi:10.1002/kin.10033 (abstract, eprints.bham.ac.uk/752): k = (3.6 +- 0.7)e-11
    # exp(-(310 +- 50)/T) cm3 s-1 over 184-298 K, "approximately 15 % lower than ... currently
    # recommended rate expressions at the lowest temperatures".  The model (the evaluation's
    # expression) must lie within 25 % of the measurement (the stated A uncertainty, ~20 %, plus
    # that 15 %); a factor 2 fails.
    measured = 3.6e-11 * math.exp(-310.0 / T)
    assert 1 / 1.25 < _k(evaluator, mech, "cl_o3", T) / measured < 1.25


@pytest.mark.parametrize("T, p_hPa", [(190.0, 50.0), (200.0, 30.0), (220.0, 100.0)])
def test_clo_clo_m_against_jpl(evaluator, mech, T, p_hPa):
    # JPL 19-5 Table 2: ClO + ClO + M -> Cl2O2 + M, k0 = 1.9e-32 (n = 3.6), kinf = 3.7e-12
    # (m = 1.6), f298 = 1.15 (recalled from memory).  Searched (2026-12-02) for the JPL 19-5 / 00-3 /
    # 97-4 table rows and the IUPAC datasheet: only title pages.  Measurements found instead:
    # Boakes et al. 2005 (see test_clo_clo_m_against_boakes_2005_at_298k); Cox and Hayman 1988,
    # Nature 332, 796 (abstract): k_ter = (6.0 +0.37 -0.34)e-32 (T/300)^(-2.1 +- 0.7) at 268-338 K,
    # 2-700 Torr, which Sander, Friedl and Yung 1989, Science 245, 1095 (abstract: "measured rate
    # constants are less than one-half as great as the previously accepted values") superseded.
    # Not found: Trolier et al. 1990, Nickolaisen et al. 1994, Bloss et al. 2001 (no abstract with
    # values was returned).  The stratospheric-temperature check therefore stays recalled.
    M = air_number_density(p_hPa * 100.0, T)
    ref = _jpl_falloff(T, M, 1.9e-32, 3.6, 3.7e-12, 1.6)
    ratio = _k(evaluator, mech, "clo_clo_m", T, p_hPa * 100.0) / ref
    assert 1 / 1.3 < ratio < 1.3


@pytest.mark.parametrize("p_torr", [50.0, 100.0, 300.0, 760.0])
def test_clo_clo_m_against_boakes_2005_at_298k(evaluator, mech, p_torr):
    # Found by search: Boakes, Hindy and Rowley 2005, "Kinetic studies of the ClO + ClO association
    # reaction as a function of temperature and pressure", Phys. Chem. Chem. Phys. 7, 4102-4113,
    # doi:10.1039/b510308h (abstract): flash photolysis / UV absorption, 206-298 K, 25-760 Torr;
    # kinf = (3.37 +- 1.67)e-12 (T/300)^(-1.49 +- 1.81) cm3 s-1 (N2, Fc fixed at 0.6) and, in air,
    # k0 = (2.62 +- 0.80)e-32 (T/300)^(-3.78 +- 0.98) cm6 s-1; errors 2 sigma.  At 298 K the
    # temperature exponents drop out (their +-1 changes (298/300)^-n by < 1 %), so the model must lie
    # between the falloff curves of (k0, kinf) at their -2 sigma and at their +2 sigma values.  The
    # model (the recalled JPL 19-5 line) sits at 0.74-0.81 of Boakes's central curve, inside the band
    # (0.63-0.68 ... 1.31-1.36); x2 (1.48-1.62) and x0.5 (0.37-0.41) fall outside.  Boakes et al. say
    # their k is "more rapid than those reported in previous studies": at 206 K the model is 0.70 (25
    # Torr) to 0.86 (760 Torr) of their air curve, inside their 2-sigma prefactor band (0.68-0.60)
    # but near its lower edge at low pressure; with the exponents' uncertainty the band at 206 K is
    # too wide (about a factor 2) for a factor-2 test, hence the check at 298 K.
    T = 298.0
    p_pa = p_torr * 133.322
    M = air_number_density(p_pa, T)
    lo = _jpl_falloff(T, M, 2.62e-32 - 0.80e-32, 3.78, 3.37e-12 - 1.67e-12, 1.49)
    hi = _jpl_falloff(T, M, 2.62e-32 + 0.80e-32, 3.78, 3.37e-12 + 1.67e-12, 1.49)
    assert lo < _k(evaluator, mech, "clo_clo_m", T, p_pa) < hi


@pytest.mark.parametrize("T", [190.0, 220.0, 298.0])
def test_clo_bro_against_jpl(evaluator, mech, T):
    # JPL 19-5 Table 1A, ClO + BrO channels (recalled from memory; searched 2026-12 for the JPL and
    # IUPAC rows without finding their text), f298 = 1.2, g = 100 each:
    # -> Br + OClO 9.5e-13 exp(550/T); -> Br + ClOO 2.3e-12 exp(260/T); -> BrCl + O2 4.1e-13 exp(290/T)
    # Found by search, not usable as a factor-2 test: Ferracci and Rowley 2014, Phys. Chem. Chem.
    # Phys., doi:10.1039/c3cp53440e (abstract): 246-314 K, k1 = (2.5 +- 2.2)e-12 exp((630 +- 240)/T),
    # OClO channel (4.6 +- 3.0)e-12 exp((280 +- 180)/T), 2 sigma statistical only, "larger absolute
    # values ... than those reported in previous studies".  At 298 K that is 2.1e-11 total and
    # 1.2e-11 for OClO, 1.6x and 2.0x the model; its stated A uncertainty (88 %) allows a factor
    # of 10, so it brackets nothing.  The disagreement is reported in docs/heterogeneous.md.  Not
    # found: Friedl and Sander 1989, Sander and Friedl 1989, Turnipseed et al. 1991 abstracts with
    # values (searched by title and by content).
    refs = {"clo_bro_a": 9.5e-13 * math.exp(550 / T), "clo_bro_b": 2.3e-12 * math.exp(260 / T),
            "clo_bro_c": 4.1e-13 * math.exp(290 / T)}
    f = _uncertainty(1.2, 100, T)
    for rid, ref in refs.items():
        assert 1 / f < _k(evaluator, mech, rid, T) / ref < f, rid


# ---------------------------------------------------------------- cross sections and J
def test_o3_cross_section_hg_line():
    # O3 absorption at the mercury line 253.65 nm: 1.13e-17 cm2 at room temperature.  Found by
    # search: Hodges et al. (2019), "Recommendation of a consensus value of the ozone absorption
    # cross-section at 253.65 nm based on a literature review", Metrologia 56, 034001 (HAL
    # hal-02126253), and Sofen et al. (2015), ACPD 15, 13627, doi:10.5194/acpd-15-13627-2015, whose
    # abstract states that the re-evaluated value (Viallon et al. 2015) is 1.8 % below Hearn (1961).
    # Hearn's 1.147e-17 cm2 and the consensus 1.1329e-17 cm2 themselves are recalled from memory.
    from boxchem.photolysis.crosssections import cross_section_data
    sigma = float(np.asarray(cross_section_data("O3")(np.array([253.65]), 295.0)).ravel()[0])
    assert sigma == pytest.approx(1.13e-17, rel=0.05, abs=0)   # abs=0: approx defaults to abs 1e-12


def test_o3_cross_section_huggins_band():
    # O3 at 310 nm and room temperature ~ 1e-19 cm2 within a factor 1.3 (Molina and Molina 1986 /
    # JPL 19-5 Table 4; recalled from memory): the band that sets J(O1D) in the stratosphere
    from boxchem.photolysis.crosssections import cross_section_data
    sigma = float(np.asarray(cross_section_data("O3")(np.array([310.0]), 295.0)).ravel()[0])
    assert 1e-19 / 1.3 < sigma < 1e-19 * 1.3


def test_cl2o2_cross_section_peak_against_measurements():
    # Found by search: the Cl2O2 band peaks near 245 nm at (6.5 +0.8/-0.5)e-18 cm2 ("Ultraviolet
    # absorption cross sections of chlorine oxide (Cl2O2) between 210 and 410 nm", abstract found;
    # authors and journal recalled: Burkholder, Orlando and Howard 1990, J. Phys. Chem. 94, 687) and at 7.6e-18 cm2 near 244.5 nm with 5-10 % (2 sigma)
    # uncertainty (Papanastasiou et al. 2009, J. Phys. Chem. A 113, 13711, Sect. 3.3-3.4).  The
    # shipped table (6.5e-18, recalled) sits on the first and 14 % below the second; it must lie
    # in the range the two span with their uncertainties.  A factor 2 in sigma fails.
    from boxchem.photolysis.crosssections import cross_section_data
    sigma = float(np.asarray(cross_section_data("Cl2O2")(np.array([245.0]), 205.0)).ravel()[0])
    assert 6.0e-18 <= sigma <= 7.6e-18 * 1.1


def _photolysis(mech, albedo=0.3, altitude_m=20000.0):
    from boxchem.photolysis.rates import PhotolysisRates
    return PhotolysisRates(mech, altitude_m=altitude_m, albedo=albedo, method="spectral")


def test_j_cl2o2_equals_its_spectral_integral(mech):
    # J = integral sigma(lambda) phi F(lambda) dlambda (definition; common practice, no source), with
    # the shipped Cl2O2 cross sections (JPL 19-5 / Papanastasiou et al. 2009, see the data file) and
    # the model's own actinic flux, computed here on the flux grid independently of the J table.
    # No published J(Cl2O2) value was found by search: this check guards the J machinery, not sigma.
    from boxchem.photolysis.actinic import flux_grid
    from boxchem.photolysis.crosssections import cross_section_data
    phot = _photolysis(mech)
    i = mech.reaction_ids.index("j_cl2o2")
    j_model = float(np.asarray(phot(np.array([60.0]), 300.0, 200.0, 1.0)).reshape(-1, len(mech.reactions))[0, i])
    from boxchem.photolysis.spectrum import model_wavelength_edges
    edges = model_wavelength_edges()
    edges = edges[(edges >= 200.0) & (edges <= 450.0)]
    flux = np.asarray(flux_grid(np.array([60.0]), 20000.0, np.array([300.0]), albedo=0.3,
                                wavelength_edges_nm=edges, temperature_K=200.0)).reshape(-1)
    sigma = cross_section_data("Cl2O2").bin_average(edges, 200.0)
    qy = float(mech.reactions[i].parameters["qy"])
    j_ref = float(np.sum(sigma * qy * flux[: sigma.size] * np.diff(edges)))
    assert j_model == pytest.approx(j_ref, rel=0.10, abs=0)


def test_j_no2_against_balloon_measurement(mech):
    # "High Sun values of JNO2 measured were 10.5 +- 0.3 and 10.3 +- 0.3 x 10-3 s-1 at 24 and 32 km"
    # (Madronich, Hastie, Schiff, Ridley 1985, "Measurement of the photodissociation coefficient of
    # NO2 in the atmosphere: II, stratospheric measurements", J. Atmos. Chem. 3, 233-245,
    # doi:10.1007/BF00210498; abstract found by search).  The model (SZA 30 deg, 300 DU, 220 K,
    # albedo 0: light scattered up by the air below the box only) gives 1.31e-2, 25 % above the
    # measurement - outside its stated +-0.3e-3.  The actinic flux is not the cause: DISORT
    # (Stamnes et al. 1988) on the same layers gives J within 0.4 % of the model's
    # (tests/test_actinic_reference.py); see docs/photolysis.md.  The band (within 30 %) catches a
    # factor-2 error in the NO2 cross section, the solar flux or the diffuse light; it is not a
    # claim of agreement, and cannot be tightened while the excess stands.
    phot = _photolysis(mech, albedo=0.0, altitude_m=24000.0)
    i = mech.reaction_ids.index("j_no2")
    j = float(np.asarray(phot(np.array([30.0]), 300.0, 220.0, 1.0)).reshape(-1, len(mech.reactions))[0, i])
    assert 1.05e-2 / 1.3 < j < 1.05e-2 * 1.3


# ---------------------------------------------------------------- gammas
def test_nat_gammas_against_jpl(evaluator, mech):
    # JPL 19-5 Table 5, NAT (recalled from memory; searched 2026-12 for the Table 5 rows and the NAT
    # measurements of Hanson and Ravishankara 1991-1993 and Abbatt and Molina 1992 (titles found in
    # reference lists, no abstract with values); ClONO2 + H2O is also checked against the found
    # measurement in test_nat_clono2_hydrolysis_within_measured_range): ClONO2 + HCl 0.2, ClONO2 + H2O 0.004,
    # HOCl + HCl 0.1, N2O5 + H2O 4e-4, N2O5 + HCl 3e-3; BrONO2 on "psc": the ice value 0.3
    ref = {"het_clono2_hcl_psc": 0.2, "het_clono2_h2o_psc": 0.004, "het_hocl_hcl_psc": 0.1,
           "het_n2o5_h2o_psc": 4e-4, "het_n2o5_hcl_psc": 3e-3, "het_brono2_h2o_psc": 0.3,
           "het_brono2_hcl_psc": 0.3, "het_hobr_hcl": 0.1}
    pp = {"H2O": 0.025, "HCl": 1e-5, "ClONO2": 5e-6}
    gamma = evaluator.surface_gamma(np.array([192.0]), {k: np.array([v]) for k, v in pp.items()})[0]
    col = {mech.reaction_ids[i]: j for j, i in enumerate(evaluator.surface_index)}
    for rid, g in ref.items():
        assert gamma[col[rid]] == pytest.approx(g, rel=0.2, abs=0), rid


def test_nat_clono2_hydrolysis_within_measured_range(evaluator, mech):
    # Found by search: "A kinetic and product study of the hydrolysis of ClONO2 on type Ia polar
    # stratospheric cloud materials at 185 K", J. Phys. Chem. A 101, 8643-8652 (1997) (abstract;
    # authors recalled: Barone, Zondlo and Tolbert): on NAT and NAD films at 185 K gamma "increased
    # from 0.0004 to 0.007 as the water partial pressure was increased from 5e-6 to 1.4e-4 Torr",
    # agreeing with the literature at 90 % relative humidity.  The model's NAT gamma has no humidity
    # dependence, so it must lie inside the measured span: 0.004 does; x2 (0.008) does not (x0.5 is
    # caught by test_nat_gammas_against_jpl).  The span is wide (a factor 17): this bounds the model,
    # it does not pin it.
    pp = {"H2O": 0.025, "HCl": 1e-5, "ClONO2": 5e-6}
    gamma = evaluator.surface_gamma(np.array([185.0]), {k: np.array([v]) for k, v in pp.items()})[0]
    col = {mech.reaction_ids[i]: j for j, i in enumerate(evaluator.surface_index)}
    assert 0.0004 < gamma[col["het_clono2_h2o_psc"]] < 0.007


@pytest.mark.parametrize("T", [192.0, 196.0, 200.0, 210.0])
def test_sulfate_gammas_are_the_published_parameterizations(evaluator, mech, T):
    # the shipped sulfate lines use Shi et al. (2001) / Hanson (2003) as JPL 19-5 recommends, and
    # N2O5 + H2O = 0.1 (JPL 19-5 Table 5, recalled): model gamma vs the parameterization itself.
    # Searched 2026-12 (again 2026-12-02, by title, authors and content) for the Shi et al. (2001)
    # text and figures: not found (the related Hanson 1998, J. Phys. Chem. A 102, 4794 abstract was,
    # without tabulated gammas; Hallquist et al. 2000, J. Phys. Chem. A 104, 3984 give N2O5 gamma =
    # 0.033 +- 0.004 on 26-65 wt% acid at 263-298 K, not at stratospheric temperatures, so not a
    # check of the cold 0.1); the tabulated values stay recalled.
    p = 5000.0
    pp = {"H2O": 5e-6 * p, "HCl": 1.5e-9 * p, "ClONO2": 0.5e-9 * p}
    ref = liquid_gammas(T, pp["H2O"], pp["HCl"], pp["ClONO2"], 1e-5)
    expected = {"het_clono2_hcl_sa": ref["shi2001_clono2_hcl"], "het_clono2_h2o_sa": ref["shi2001_clono2_h2o"],
                "het_hocl_hcl_sa": ref["shi2001_hocl_hcl"], "het_brono2_h2o_sa": ref["hanson2003_brono2_h2o"],
                "het_n2o5_h2o_sa": 0.1}
    gamma = evaluator.surface_gamma(np.array([T]), {k: np.array([v]) for k, v in pp.items()})[0]
    col = {mech.reaction_ids[i]: j for j, i in enumerate(evaluator.surface_index)}
    for rid, g in expected.items():
        assert gamma[col[rid]] == pytest.approx(float(g), rel=0.01, abs=0), rid


# ---------------------------------------------------------------- simulated loss rates
@pytest.fixture(scope="module")
def activated_noon():
    """Two sunlit days of activated vortex air (polar-spring values from 10 September)."""
    return boxchem.run("polar-spring", **{"run.start": "2026-09-10T00:00:00Z", "run.duration": "2 d",
                                          "run.output_interval": "30 min"})


def _noon_index(ds):
    sza = ds["solar_zenith_angle"].values
    day2 = np.arange(sza.size) >= sza.size // 2
    return int(np.argmin(np.where(day2, sza, np.inf)))


def test_dimer_cycle_rate_is_rate_limited_by_clo_clo_m(activated_noon, mech):
    # ClO-dimer cycle at noon: photochemical steady state of Cl2O2 makes its Ox loss rate equal
    # to 2 k[ClO]^2 (k: effective second-order ClO + ClO + M at the box's [M]) minus the small
    # thermal decomposition (Molina and Molina 1987; common practice).  k from JPL 19-5 (see
    # test_clo_clo_m_against_jpl, recalled); within 10 %.
    ds = activated_noon
    i = _noon_index(ds)
    T, M = float(ds["temperature"][i]), float(ds["air_number_density"][i])
    clo = float(ds["number_density"].sel(species="ClO")[i])
    k_jpl = _jpl_falloff(T, M, 1.9e-32, 3.6, 3.7e-12, 1.6)
    simulated = float(ds["cycle_rate"].sel(cycle="clo_dimer")[i])
    assert simulated == pytest.approx(2 * k_jpl * clo ** 2, rel=0.10, abs=0)


def test_clo_bro_cycle_rate(activated_noon):
    # ClO + BrO cycle: Ox loss 2 (k_b + k_c)[ClO][BrO] with the JPL 19-5 channel rates (recalled,
    # see test_clo_bro_against_jpl); the OClO channel is a null cycle in sunlight (common practice)
    ds = activated_noon
    i = _noon_index(ds)
    T = float(ds["temperature"][i])
    clo = float(ds["number_density"].sel(species="ClO")[i])
    bro = float(ds["number_density"].sel(species="BrO")[i])
    k = 2.3e-12 * math.exp(260 / T) + 4.1e-13 * math.exp(290 / T)
    assert float(ds["cycle_rate"].sel(cycle="clo_bro")[i]) == pytest.approx(2 * k * clo * bro, rel=0.25, abs=0)


def test_noon_dimer_to_clo_ratio_follows_j(activated_noon, mech):
    # steady state [Cl2O2] = k[ClO]^2 / J at noon (common practice): with k from JPL 19-5 and J
    # from the spectral integral of test_j_cl2o2_equals_its_spectral_integral (model flux).
    # A factor 2 in J(Cl2O2) halves [Cl2O2]/[ClO]^2.
    ds = activated_noon
    i = _noon_index(ds)
    T, M = float(ds["temperature"][i]), float(ds["air_number_density"][i])
    clo = float(ds["number_density"].sel(species="ClO")[i])
    dimer = float(ds["number_density"].sel(species="Cl2O2")[i])
    j_run = float(ds["rate_coefficient"].sel(reaction="j_cl2o2")[i])
    k_jpl = _jpl_falloff(T, M, 1.9e-32, 3.6, 3.7e-12, 1.6)
    from boxchem.photolysis.actinic import flux_grid
    from boxchem.photolysis.crosssections import cross_section_data
    from boxchem.photolysis.spectrum import model_wavelength_edges
    edges = model_wavelength_edges()
    edges = edges[(edges >= 200.0) & (edges <= 450.0)]
    sza = float(ds["solar_zenith_angle"][i])
    flux = np.asarray(flux_grid(np.array([sza]), float(ds["altitude"]), np.array([float(ds["ozone_column"][i])]),
                                albedo=0.8, wavelength_edges_nm=edges, temperature_K=T)).reshape(-1)
    sigma = cross_section_data("Cl2O2").bin_average(edges, T)
    j_ref = float(np.sum(sigma * float(mech.reactions[mech.reaction_ids.index("j_cl2o2")].parameters["qy"])
                         * flux[: sigma.size] * np.diff(edges)))
    assert j_run == pytest.approx(j_ref, rel=0.25, abs=0)
    assert dimer == pytest.approx(k_jpl * clo ** 2 / j_ref, rel=0.25, abs=0)


# ---------------------------------------------------------------- issue 11 review items (item 5)
@pytest.mark.parametrize("T", [195.0, 220.0, 298.0])
def test_h_o2_m_against_jpl(evaluator, mech, T):
    # JPL 19-5 Table 2: H + O2 + M -> HO2, k0 = 4.4e-32 (n = 1.3), kinf = 7.5e-11 (m = -0.2),
    # f298 = 1.15 (recalled from memory; issue 11 measured the old line 1.5x above it at 195 K).
    # Searched 2026-12-02: Michael et al. 2002, J. Phys. Chem. A 106, 5297 and Cobos, Hippler and
    # Troe 1985, J. Phys. Chem. 89, 342 were found, their returned abstracts without the values.
    M = air_number_density(5000.0, T)
    ref = _jpl_falloff(T, M, 4.4e-32, 1.3, 7.5e-11, -0.2)
    assert _k(evaluator, mech, "h_o2_m", T) / ref == pytest.approx(1.0, rel=0.15, abs=0)


def test_cl2o2_quantum_yield(mech):
    # Cl2O2 + hv -> Cl + ClOO: quantum yield about 0.9 above 300 nm (JPL 19-5 Table 4 note,
    # recalled from memory), not 1.  Searched 2026-12-02 for Moore et al. 1999 and Plenge et al.
    # 2005: not found.  The product sigma x phi is checked against a found measurement below.
    assert float(mech.reaction("j_cl2o2").parameters["qy"]) == pytest.approx(0.9, rel=1e-9, abs=0)


def test_cl2o2_photodissociation_cross_section_at_330_nm(mech):
    # Found by search: "Photodissociation Cross Section of ClOOCl at 330 nm", J. Phys. Chem. A 114,
    # 4791-4797 (2010) (abstract; molecular beam, mass-resolved, so free of the impurity problem of
    # absorption spectra): the photodissociation cross section - absorption cross section times
    # dissociation quantum yield - is (2.31 +- 0.11)e-19 cm2 at 200 K (and (2.47 +- 0.12)e-19 at
    # 250 K).  The model's sigma(330 nm) x qy (the shipped table has no temperature dependence) is
    # 2.50e-19 x 0.9 = 2.25e-19: inside the 200 K value's stated uncertainty; qy = 1 (2.50e-19) or
    # qy = 0.8 (2.00e-19) would fail, and so would a factor 2 in either.  At 250 K the model is 9 %
    # below the measurement, outside its +-0.12 - reported in docs/heterogeneous.md.
    from boxchem.photolysis.crosssections import cross_section_data
    sigma = float(np.asarray(cross_section_data("Cl2O2")(np.array([330.0]), 200.0)).ravel()[0])
    qy = float(mech.reaction("j_cl2o2").parameters["qy"])
    assert (2.31e-19 - 0.11e-19) <= sigma * qy <= (2.31e-19 + 0.11e-19)


def test_falloff_form_is_referenced_to_300_k(evaluator, mech):
    # JPL 19-5 gives k0 and kinf at 300 K (section 2): at 300 K the model must equal the JPL form
    # with the table's values to 0.5 % (a 298 K reference would be 2.4 % off for n = 3.6)
    r = mech.reaction("clo_clo_m")
    assert r.parameters["Tref"] == 300.0
    for M in (1e16, 1e18):
        k = float(evaluator.thermal(300.0, M)[mech.reaction_ids.index("clo_clo_m")])
        assert k == pytest.approx(_jpl_falloff(300.0, M, 1.9e-32, 3.6, 3.7e-12, 1.6), rel=5e-3, abs=0)
