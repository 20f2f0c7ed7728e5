"""Spectral actinic flux at the box: direct beam plus diffuse light.

Method
------
* Atmosphere: spherical shells from the ground to 80 km (1 km thick up to
  50 km, 5 km above), plus a level at the box.  Air from the U.S. Standard
  Atmosphere 1976 (:func:`boxchem.environment.atmosphere.standard_atmosphere`,
  layer columns integrated assuming exponential density within each layer);
  O2 is 20.95 % of air; ozone from the idealised profile of
  :func:`boxchem.environment.atmosphere.ozone_profile` scaled to the overhead
  column (layer columns are exact differences of the column above).
* Direct beam: Beer-Lambert along the refraction-free straight ray from the
  sun to each level, through spherical shells, with the slant path of every
  layer from exact chord lengths.  For SZA > 90 deg the ray descends to its
  tangent point below the level and rises again, so layers between the
  tangent height and the level count twice; rays whose tangent point is
  below the ground are blocked.  Absorbers: O3 and O2 (bin-mean cross
  sections; O3 at each layer's temperature) and Rayleigh extinction
  (Bodhaine et al. 1999, :mod:`boxchem.photolysis.rayleigh`).
* Diffuse light: the two-stream equations in the Eddington form (Toon,
  McKay, Ackerman and Santhanam 1989, J. Geophys. Res. 94, 16287,
  doi:10.1029/JD094iD13p16287, Table 1, Eqs. 1-2 and 23-24 for the
  particular solution; for Rayleigh scattering the asymmetry factor g = 0, so
  the delta-Eddington scaling of Joseph, Wiscombe and Weinman 1976 leaves the
  layers unchanged), solved exactly for each homogeneous layer and combined
  over the layers by the adding method (layer reflectance/transmittance and
  source terms, swept from the ground up and from the top down to the box).
  The direct-beam source uses the pseudo-spherical beam: the attenuation
  inside each layer follows the spherical slant optical depth (Dahlback and
  Stamnes 1991, Planet. Space Sci. 39, 671).  Lambertian lower boundary with
  albedo ``albedo`` (surface and clouds lumped).
  Actinic flux = direct + diffuse radiance summed over solid angle at the box,
  with the radiances from the source-function technique (Toon et al. 1989,
  Section 4) on the two-stream source and the Rayleigh phase function for the
  single-scattered beam (see :func:`_diffuse_at_box`); the Eddington closure
  2 (F_up + F_down) alone undercounts the limb-brightened Rayleigh light.
* O2 Schumann-Runge bands (175-205 nm): documented simplification.  The O2
  cross section is averaged over each 1 nm bin, so band structure is not
  resolved.  Because <exp(-sigma N)> >= exp(-<sigma> N), this underestimates
  the transmitted flux below 205 nm and hence J(O2) from that region; at
  20-30 km the flux below 205 nm is so strongly absorbed that the
  Herzberg continuum (205-242 nm) carries J(O2) (the measured share of
  175-205 nm in J(O2) is stated in docs/photolysis.md).
* Not included: refraction, aerosols and clouds as layers, twilight light
  from sunlit air above the box after the sun has set at the box, the
  polarisation of Rayleigh scattering.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..units import DOBSON_UNIT_CM2
from .rayleigh import rayleigh_cross_section
from .spectrum import extraterrestrial_flux, model_wavelength_edges

#: Earth radius [m] shared with the solar geometry
from ..environment.solar import EARTH_RADIUS_M  # noqa: E402

#: O2 mole fraction in dry air (U.S. Standard Atmosphere 1976 composition)
O2_MOLE_FRACTION = 0.2095
#: default Lambertian albedo, see boxchem.photolysis.rates
DEFAULT_ALBEDO = 0.3
TOP_OF_MODEL_M = 80_000.0


def default_levels(altitude_m: float) -> np.ndarray:
    """Level altitudes [m], top first: 80-50 km every 5 km, 50-0 km every 1 km, plus the box."""
    z = np.concatenate([np.arange(0.0, 50_000.0, 1000.0), np.arange(50_000.0, TOP_OF_MODEL_M + 1, 5000.0)])
    z = np.union1d(z, [float(altitude_m)])
    return z[::-1].copy()


@dataclass(frozen=True)
class LayeredAtmosphere:
    """Layers between levels (top first).  Columns per layer [cm-2]."""

    levels_m: np.ndarray          # (n_levels,), top first
    box_level: int                # index of the box in levels_m
    air_column: np.ndarray        # (n_layers,)
    ozone_column_unit: np.ndarray  # (n_layers,) for a 1 DU total column
    temperature_K: np.ndarray     # (n_layers,) layer mean temperature


def layered_atmosphere(altitude_m: float, ozone_profile: str = "midlatitude") -> LayeredAtmosphere:
    """Air and ozone (per DU of total column) columns of each layer [cm-2]."""
    from ..environment.atmosphere import air_number_density, ozone_column_above, standard_atmosphere

    z = default_levels(altitude_m)
    p, t = standard_atmosphere(z)
    n = air_number_density(p, t)
    dz_cm = (z[:-1] - z[1:]) * 100.0
    # exponential density within a layer: column = (n_bottom - n_top) dz / ln(n_bottom / n_top)
    air = (n[1:] - n[:-1]) * dz_cm / np.log(n[1:] / n[:-1])
    above = ozone_column_above(z, 1.0, kind=ozone_profile) * DOBSON_UNIT_CM2
    ozone = above[1:] - above[:-1]
    box = int(np.flatnonzero(z == float(altitude_m))[0])
    return LayeredAtmosphere(z, box, air, ozone, 0.5 * (t[:-1] + t[1:]))


def slant_path_factors(levels_m: np.ndarray, sza_deg: np.ndarray) -> np.ndarray:
    """Slant path through each layer / layer thickness for the ray from the sun to each level [1].

    ``levels_m`` top first (n_levels,), ``sza_deg`` (n_sza,) [degrees].
    Returns (n_sza, n_levels, n_layers); ``inf`` in every layer for a ray whose
    tangent point lies below the ground (sun below that level's horizon).
    Exact chord lengths through spherical shells (straight rays, no refraction).
    """
    r = EARTH_RADIUS_M + np.asarray(levels_m, dtype=float)
    chi = np.radians(np.asarray(sza_deg, dtype=float))[:, None, None]
    r_top, r_bot = r[None, None, :-1], r[None, None, 1:]
    r_lev = r[None, :, None]
    p = r_lev * np.sin(chi)                           # impact parameter of the ray
    p2 = p * p

    def chord(ra, rb):                                # path from radius ra up to rb (both >= p)
        return np.sqrt(np.maximum(rb * rb - p2, 0.0)) - np.sqrt(np.maximum(ra * ra - p2, 0.0))

    above = r_bot >= r_lev - 1e-6                     # layer lies above the level
    once = np.where(above, chord(r_bot, r_top), 0.0)
    below = (~above) & (r_top > p) & (np.cos(chi) < 0.0)
    twice = np.where(below, 2.0 * chord(np.maximum(r_bot, p), r_top), 0.0)
    factors = (once + twice) / (r_top - r_bot)
    blocked = (np.cos(chi) < 0.0) & (p < r[-1])       # tangent point below the ground
    return np.where(blocked, np.inf, factors)


def _absorber_cross_sections(edges, temperatures, absorbers, cross_sections):
    """Bin-mean cross sections [cm2]: O3 (n_layers, n_bins), O2 (n_bins,)."""
    from .crosssections import cross_section_data

    n_bins = edges.size - 1
    out = {}
    for name in ("O3", "O2"):
        if name not in absorbers:
            out[name] = np.zeros(n_bins) if name == "O2" else np.zeros((temperatures.size, n_bins))
            continue
        data = cross_sections.get(name) if cross_sections else None
        if data is None:
            data = cross_section_data(name)
        if isinstance(data, np.ndarray):
            values = np.broadcast_to(data, (n_bins,))
            out[name] = values if name == "O2" else np.broadcast_to(values, (temperatures.size, n_bins))
        elif name == "O3":
            out[name] = data.bin_average(edges, temperatures)
        else:
            out[name] = data.bin_average(edges, float(np.mean(temperatures)))
    return out["O3"], out["O2"]


def _two_stream_layers(dtau, w0):
    """Eddington coefficients (g = 0) and layer R, T for diffuse light (Toon et al. 1989)."""
    gamma1 = (7.0 - 4.0 * w0) / 4.0
    gamma2 = -(1.0 - 4.0 * w0) / 4.0
    # lambda -> 0 for conservative scattering (w0 = 1); written with expm1 so that
    # R -> gamma1 tau / (1 + gamma1 tau), T -> 1 / (1 + gamma1 tau) in that limit
    lam = np.maximum(np.sqrt(np.maximum(gamma1 * gamma1 - gamma2 * gamma2, 0.0)), 1e-12)
    one_minus_e2 = -np.expm1(-2.0 * lam * dtau)
    denom = 2.0 * lam + (gamma1 - lam) * one_minus_e2
    refl = gamma2 * one_minus_e2 / denom
    trans = 2.0 * lam * np.exp(-lam * dtau) / denom
    return gamma1, gamma2, lam, refl, trans


def flux_grid(sza_deg, altitude_m, ozone_column_DU, *, albedo=DEFAULT_ALBEDO, distance_factor=1.0,
              wavelength_edges_nm=None, temperature_K=None, ozone_profile="midlatitude",
              absorbers=("O3", "O2"), rayleigh=True, diffuse=True, cross_sections=None,
              components=False):
    """Actinic flux on the outer product of SZA (n_sza,) and ozone column (n_oz,).

    Returns flux [photons cm-2 s-1 nm-1] of shape (n_sza, n_oz, n_bins); with
    ``components=True`` a tuple (direct, diffuse) of that shape.  Zero where
    ``sza >= horizon`` of the box.  See :func:`actinic_flux` for the arguments.
    """
    sza = np.atleast_1d(np.asarray(sza_deg, dtype=float))
    ozone = np.atleast_1d(np.asarray(ozone_column_DU, dtype=float))
    edges = model_wavelength_edges() if wavelength_edges_nm is None else np.asarray(wavelength_edges_nm, float)
    centres = 0.5 * (edges[1:] + edges[:-1])
    atm = layered_atmosphere(float(altitude_m), ozone_profile)
    t_layers = atm.temperature_K if temperature_K is None else np.full_like(atm.temperature_K, float(temperature_K))
    sigma_o3, sigma_o2 = _absorber_cross_sections(edges, t_layers, tuple(absorbers), cross_sections)
    sigma_r = rayleigh_cross_section(centres) if rayleigh else np.zeros(centres.size)

    # vertical optical depths of each layer: (n_oz, n_layers, n_bins)
    tau_abs = (ozone[:, None, None] * atm.ozone_column_unit[None, :, None] * sigma_o3[None]
               + (O2_MOLE_FRACTION * atm.air_column)[None, :, None] * sigma_o2[None, None, :])
    tau_sca = np.broadcast_to((atm.air_column[:, None] * sigma_r[None, :])[None], tau_abs.shape)
    dtau = tau_abs + tau_sca

    # slant optical depth from the sun to every level, level axis first so that
    # the layer sweeps below read contiguous slices: (n_levels, n_sza, n_oz, n_bins)
    paths = slant_path_factors(atm.levels_m, sza)                # (n_sza, n_lev, n_lay)
    blocked = ~np.isfinite(paths[:, :, 0])
    finite_paths = np.where(np.isfinite(paths), paths, 0.0).transpose(1, 0, 2)
    n_lev, n_sza, n_lay = finite_paths.shape
    n_oz, n_bins = ozone.size, centres.size
    slant = finite_paths.reshape(n_lev * n_sza, n_lay) @ dtau.transpose(1, 0, 2).reshape(n_lay, n_oz * n_bins)
    slant = slant.reshape(n_lev, n_sza, n_oz, n_bins)
    beam = np.exp(-slant)                                         # transmission to each level
    beam[np.broadcast_to(blocked.T[:, :, None, None], beam.shape)] = 0.0
    f0 = extraterrestrial_flux(edges if wavelength_edges_nm is not None else None) * distance_factor
    b = atm.box_level
    direct = beam[b] * f0

    if diffuse and (rayleigh or albedo > 0.0):
        diff = _diffuse_at_box(dtau, tau_sca, beam, slant, sza, float(albedo), b) * f0
    else:
        diff = np.zeros_like(direct)

    from ..environment.solar import horizon_zenith_angle
    dark = sza >= float(horizon_zenith_angle(float(altitude_m)))
    direct[dark] = 0.0
    diff[dark] = 0.0
    if components:
        return direct, diff
    return direct + diff


def _layer_sources(j, dtau, w0, gamma1, gamma2, lam, refl, trans, beam, slant):
    """Diffuse source terms (sU_j, sD_j) of layer j per unit extraterrestrial flux.

    Particular solution of the two-stream equations for a beam S(tau) =
    S_top exp(-k0 tau): D_p = C- S, U_p = C+ S with (Toon et al. 1989,
    Eqs. 23-24, g = 0 so gamma3 = gamma4 = 1/2)
        C- = w0 (gamma4 (gamma1 + k0) + gamma2 gamma3) / (lambda^2 - k0^2)
        C+ = w0 (gamma3 (gamma1 - k0) + gamma2 gamma4) / (lambda^2 - k0^2)
    and k0 = d(tau_slant)/d(tau) of the layer (pseudo-spherical beam).
    The homogeneous part that restores the boundary values gives
        sU = U_p(top) - R D_p(top) - T U_p(bottom)
        sD = D_p(bottom) - T D_p(top) - R U_p(bottom).
    """
    d = dtau[:, j]                                                 # (n_oz, n_bins)
    s_top, s_bot = beam[j], beam[j + 1]                            # (n_sza, n_oz, n_bins)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        k0 = (slant[j + 1] - slant[j]) / d
    k0 = np.where(np.isfinite(k0) & (k0 > 0.0), k0, 1.0)
    lam_j = lam[:, j]
    det = lam_j * lam_j - k0 * k0
    near = np.abs(det) < 1e-6 * k0 * k0                            # resonance: nudge k0
    if np.any(near):
        k0 = np.where(near, k0 * (1.0 + 1e-3), k0)
        det = lam_j * lam_j - k0 * k0
    g1, g2, w = gamma1[:, j], gamma2[:, j], w0[:, j]
    c_minus = w * (0.5 * (g1 + k0) + 0.5 * g2) / det
    c_plus = w * (0.5 * (g1 - k0) + 0.5 * g2) / det
    r, t = refl[:, j], trans[:, j]
    s_up = c_plus * s_top - r * c_minus * s_top - t * c_plus * s_bot
    s_down = c_minus * s_bot - t * c_minus * s_top - r * c_plus * s_bot
    return s_up, s_down


#: Gauss-Legendre directions per hemisphere for the radiances at the box
SOURCE_FUNCTION_STREAMS = 8
#: directions per hemisphere and number of the source iterations at every level
ITERATION_STREAMS = 3
SOURCE_ITERATIONS = 4


def _diffuse_at_box(dtau, tau_sca, beam, slant, sza, albedo, b):
    """Diffuse actinic flux at level ``b`` per unit extraterrestrial flux.

    Source-function technique (Toon et al. 1989, Section 4): the Eddington
    two-stream solution (:func:`diffuse_irradiance_profiles`) gives the mean
    radiance at every level; with it the scattering source (azimuth-mean
    Rayleigh phase function p = 1 + P2(mu) P2(mu') / 2, Chandrasekhar 1960,
    Radiative Transfer, Ch. I)
        S(tau, mu) = w0 [I0 + P2(mu) I2 / 2] + w0 F0 exp(-tau_slant) p(mu, mu0) / (4 pi)
    is integrated along Gauss directions from the ground (Lambertian, radiance
    A (mu0 F_dir + D) / pi) and from the top (no diffuse light) to each level,
    and the radiances are summed over solid angle.  SOURCE_ITERATIONS passes
    over every level (ITERATION_STREAMS directions) replace the Eddington
    moments I0 (and I2 = 0) by those of the integrated radiances (Lambda
    iteration), then a last pass gives the box with SOURCE_FUNCTION_STREAMS
    directions.  The single-scattered light keeps its exact angular shape.
    This removes the Eddington closure 4 pi I0 = 2 (F_up + F_down), which
    assumes a nearly isotropic field and undercounts limb-brightened Rayleigh
    light (the upwelling light seen from the stratosphere): at 24 km, 400 nm,
    SZA 30 deg it gave 0.30 of the direct beam as diffuse actinic flux where
    a Monte Carlo solution of the same atmosphere gives 0.39
    (tests/test_actinic.py).  Within a layer each source term is interpolated
    exponentially between its level values (exact for the beam term, whose
    slant optical depth is linear in tau).
    """
    down, up, w0 = diffuse_irradiance_profiles(dtau, tau_sca, beam, slant, sza, albedo)
    m0 = 2.0 * (down + up)                 # actinic flux of the diffuse light at every level
    ratio2 = np.zeros_like(m0)             # its P2 moment / m0 (0 for the Eddington field)
    d_ground = down[-1]
    for _ in range(SOURCE_ITERATIONS):
        m0, ratio2, d_ground = _source_function_sweep(dtau, w0, beam, slant, sza, albedo, m0, ratio2,
                                                       d_ground, ITERATION_STREAMS, None)
    return _source_function_sweep(dtau, w0, beam, slant, sza, albedo, m0, ratio2, d_ground,
                                  SOURCE_FUNCTION_STREAMS, b)


def _source_function_sweep(dtau, w0, beam, slant, sza, albedo, m0, ratio2, d_ground, n_streams, box):
    """Integrate the radiance along ``n_streams`` Gauss directions per hemisphere.

    ``m0`` (n_levels, n_sza, n_oz, n_bins) actinic flux of the diffuse light at
    every level and ``ratio2`` its P2 moment / m0 define the diffuse source;
    ``d_ground`` the diffuse downward irradiance at the ground.  With ``box`` =
    a level index: returns the diffuse actinic flux there; with ``box=None``:
    (m0, ratio2, d_ground) of the integrated radiances at every level.  The
    sweep itself is compiled (:func:`boxchem.photolysis.radiance.radiance_sweep`).
    """
    from .radiance import radiance_sweep

    n_lev = beam.shape[0]
    col_shape = beam.shape[1:]                                 # (n_sza, n_oz, n_bins)
    n_col = int(np.prod(col_shape))
    n_lay = n_lev - 1

    def columns(a, lead):
        return np.ascontiguousarray(np.broadcast_to(a, (lead,) + col_shape).reshape(lead, n_col))

    dtau_c = columns(dtau.transpose(1, 0, 2)[:, None], n_lay)
    w0_c = columns(w0.transpose(1, 0, 2)[:, None], n_lay)
    mu0 = np.cos(np.radians(sza))[:, None, None]
    p2_sun = np.broadcast_to(0.5 * (3.0 * mu0 * mu0 - 1.0), col_shape).reshape(n_col).copy()
    mu0_pos = np.broadcast_to(np.maximum(mu0, 0.0), col_shape).reshape(n_col).copy()
    mu_g, w_g = np.polynomial.legendre.leggauss(n_streams)
    mu, weight = 0.5 * (mu_g + 1.0), 0.5 * w_g
    every = box is None
    out_m0 = np.zeros((n_lev if every else 1, n_col))
    out_r2 = np.zeros((n_lev if every else 1, n_col))
    out_dg = np.zeros(n_col)
    # exp(-dtau / mu) per direction, layer and (ozone, wavelength): shared by all zenith angles
    trans_mu = np.exp(-dtau.transpose(1, 0, 2)[None] / mu[:, None, None, None]).reshape(mu.size, n_lay, -1)
    radiance_sweep(dtau_c, w0_c, np.ascontiguousarray(trans_mu), columns(beam, n_lev), columns(slant, n_lev), columns(m0, n_lev),
                   columns(ratio2, n_lev), p2_sun, mu0_pos, columns(d_ground, 1)[0], float(albedo),
                   mu, weight, -1 if every else int(box), out_m0, out_r2, out_dg)
    if not every:
        return out_m0[0].reshape(col_shape)
    return (out_m0.reshape((n_lev,) + col_shape), out_r2.reshape((n_lev,) + col_shape),
            out_dg.reshape(col_shape))


def diffuse_irradiance_profiles(dtau, tau_sca, beam, slant, sza, albedo):
    """Eddington two-stream diffuse irradiances at every level per unit extraterrestrial flux.

    Returns (D, U, w0): downward and upward diffuse irradiance, each
    (n_levels, n_sza, n_oz, n_bins), and the single-scattering albedo of the
    layers (n_oz, n_layers, n_bins).  Adding method over homogeneous
    Eddington layers (Toon et al. 1989).  Level fluxes of layer j (between
    levels j and j+1, top first):
        U_j     = R_j D_j + T_j U_{j+1} + sU_j
        D_{j+1} = T_j D_j + R_j U_{j+1} + sD_j
    (sources from :func:`_layer_sources`).  Below each level the stack is
    summarised as U = A D + B (swept from the Lambertian ground up), above
    it as D = Rs U + Es (swept from the top down); both sweeps cover the
    whole column.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        w0 = np.where(dtau > 0.0, tau_sca / dtau, 0.0)                     # (n_oz, n_lay, n_bins)
    gamma1, gamma2, lam, refl, trans = _two_stream_layers(dtau, w0)
    n_lay = dtau.shape[1]
    layer = (dtau, w0, gamma1, gamma2, lam, refl, trans, beam, slant)
    sources = [_layer_sources(j, *layer) for j in range(n_lay)]

    mu0 = np.maximum(np.cos(np.radians(sza)), 0.0)[:, None, None]
    shape = (n_lay + 1,) + beam.shape[1:]
    a_lev, b_lev = np.empty(shape), np.empty(shape)
    a_lev[-1] = albedo
    b_lev[-1] = albedo * mu0 * beam[-1]
    for j in range(n_lay - 1, -1, -1):                       # ground up
        s_up, s_down = sources[j]
        r, t = refl[:, j], trans[:, j]
        a, bb = a_lev[j + 1], b_lev[j + 1]
        inv = 1.0 / (1.0 - r * a)
        b_lev[j] = t * a * (r * bb + s_down) * inv + t * bb + s_up
        a_lev[j] = r + t * t * a * inv
    rs_lev, es_lev = np.empty(shape), np.empty(shape)
    rs_lev[0] = 0.0
    es_lev[0] = 0.0
    for j in range(n_lay):                                   # top down
        s_up, s_down = sources[j]
        r, t = refl[:, j], trans[:, j]
        rs, es = rs_lev[j], es_lev[j]
        inv = 1.0 / (1.0 - rs * r)
        es_lev[j + 1] = t * (rs * s_up + es) * inv + s_down
        rs_lev[j + 1] = r + t * t * rs * inv
    down = (rs_lev * b_lev + es_lev) / (1.0 - rs_lev * a_lev)
    up = a_lev * down + b_lev
    return down, up, w0


def actinic_flux(sza_deg, altitude_m, ozone_column_DU, *, albedo=DEFAULT_ALBEDO, temperature_K=None,
                 distance_factor=1.0, wavelength_edges_nm=None, ozone_profile="midlatitude",
                 absorbers=("O3", "O2"), rayleigh=True, diffuse=True, cross_sections=None):
    """Spectral actinic flux at the box [photons cm-2 s-1 nm-1].

    Parameters
    ----------
    sza_deg : array_like
        Solar zenith angle(s) at the box [degrees]; any shape.
    altitude_m : float
        Altitude of the box [m], 0-80000.
    ozone_column_DU : float
        Overhead ozone column at the location [DU]; the idealised profile of
        ``ozone_profile`` ("midlatitude" or "polar") is scaled to it.
    albedo : float
        Lambertian albedo of the ground and clouds [1] (default 0.3).
    temperature_K : float, optional
        Temperature [K] for the O3 cross sections in every layer; default the
        U.S. Standard Atmosphere 1976 temperature of each layer.
    distance_factor : float
        (1 AU / r)^2 [1].
    wavelength_edges_nm : array_like, optional
        Bin edges [nm] taken from the model grid; default the whole grid.
    absorbers, rayleigh, diffuse :
        Switches for tests and diagnostics: which absorbers attenuate the
        beam, whether Rayleigh scattering acts, whether diffuse light is added.
    cross_sections : mapping, optional
        {"O3" or "O2": SpectralData or bin-mean array [cm2]} overrides.

    Returns
    -------
    (wavelength_nm, flux): bin centres [nm] (n_bins,) and the flux with shape
    ``np.shape(sza_deg) + (n_bins,)``; zero where the sun is below the box's
    horizon.  The method is described in the module docstring.
    """
    sza = np.asarray(sza_deg, dtype=float)
    edges = model_wavelength_edges() if wavelength_edges_nm is None else np.asarray(wavelength_edges_nm, float)
    flux = flux_grid(sza.ravel(), altitude_m, float(ozone_column_DU), albedo=albedo,
                     distance_factor=distance_factor, wavelength_edges_nm=wavelength_edges_nm,
                     temperature_K=temperature_K, ozone_profile=ozone_profile, absorbers=absorbers,
                     rayleigh=rayleigh, diffuse=diffuse, cross_sections=cross_sections)
    return 0.5 * (edges[1:] + edges[:-1]), flux[:, 0, :].reshape(sza.shape + (edges.size - 1,))
