"""Photolysis frequencies J [s-1] for every reaction of a mechanism.

``PhotolysisRates`` is built once per run and called at every solver step, so
everything that does not depend on the step's (solar zenith angle, overhead
ozone column, temperature) is precomputed at construction:

* ``method="spectral"``: reactions with ``data=`` get J from a table of
  spectrally integrated J-values on a (SZA, ozone column, temperature) grid
  (:mod:`boxchem.photolysis.jtable`), interpolated at call time.  Reactions
  with only ``l= m= n=`` use the parametric form below.  A data set that
  cannot be loaded is an error (DataFileError naming the reaction), also when
  the reaction has ``l m n``: a run never swaps its J silently.
* ``method="parametric"``: every photolysis reaction uses ``l m n``.

The parametric form and its extension to grazing sun
-----------------------------------------------------
``J = l cos(chi)^m exp(-n sec(chi))`` is the usual compact fit of J to the
solar zenith angle chi.  It diverges in meaning at chi -> 90 deg (sec -> inf,
cos -> 0, J -> 0 at 90 deg exactly), whereas an elevated box still sees the
sun until its own horizon, chi_h = 90 deg + arccos(R / (R + z)).  We therefore
replace ``sec(chi)`` by the Chapman air mass ``a(chi, z)`` of the box's
altitude (the relative slant column of air along the sun's path to the box,
finite up to chi_h; :func:`boxchem.environment.solar.chapman_air_mass`) and
``cos(chi)`` by ``1 / a(chi, z)``:

    J = l a^-m exp(-n a).

So that published ``l m n`` keep their meaning where they were fitted,
``a = sec(chi)`` exactly for chi <= 75 deg; beyond, ``a`` is the Chapman air
mass scaled by sec(75 deg) / Ch(75 deg, z) (a factor of about 1.015 at 20 km),
which makes ``a`` continuous at 75 deg and finite up to the horizon.  J stays
positive up to the horizon (it may underflow to 0.0 in double precision for
large n at the horizon, where a reaches about 1000 at 20 km).  ``l`` is the
overhead-sun value at 1 AU times exp(n).

Everything is scaled by ``scale=`` (mechanism key) and by the Earth-Sun
distance factor (1 AU / r)^2, and is exactly zero where
``sza >= horizon_zenith_angle(altitude)`` (beyond the box's geometric
horizon; the weak twilight from sunlit air above the box is neglected).

Default albedo 0.3: a mean Lambertian reflectivity of the surface and clouds
below a stratospheric box, close to Earth's planetary (Bond) albedo of about
0.3 (recalled from memory).  Over snow, ice or bright cloud decks (polar
spring) values of 0.6-0.9 are more realistic: set it per scenario.
"""
from __future__ import annotations

import numpy as np

from ..errors import BoxchemError

#: default Lambertian albedo below the box (see module docstring)
DEFAULT_ALBEDO = 0.3
METHODS = ("spectral", "parametric")
#: SZA step [deg] of the precomputed air-mass lookup of the parametric form
_AIRMASS_STEP_DEG = 0.01
#: below this SZA [deg] the parametric form uses sec(chi) exactly
SEC_LIMIT_DEG = 75.0


def _lmn(reaction):
    p = reaction.parameters
    if all(k in p for k in ("l", "m", "n")):
        return float(p["l"]), float(p["m"]), float(p["n"])
    return None


def parametric_air_mass(sza_deg, altitude_m):
    """Air mass of the parametric form [1]: sec(chi) up to 75 deg, scaled Chapman beyond.

    ``sza_deg`` [degrees] below the box's horizon; ``altitude_m`` [m] scalar.
    Chapman grazing-incidence function from
    :func:`boxchem.environment.solar.chapman_air_mass` (Chapman 1931,
    Proc. Phys. Soc. 43, 483), scaled to be continuous with sec(chi) at 75 deg.
    """
    from ..environment.solar import chapman_air_mass

    chi = np.asarray(sza_deg, dtype=float)
    limit = SEC_LIMIT_DEG
    match = (1.0 / np.cos(np.radians(limit))) / float(chapman_air_mass(limit, altitude_m))
    with np.errstate(divide="ignore"):
        sec = 1.0 / np.cos(np.radians(np.minimum(chi, limit)))
    grazing = np.asarray(chapman_air_mass(np.maximum(chi, limit), altitude_m), dtype=float) * match
    return np.where(chi <= limit, sec, grazing)


class PhotolysisRates:
    """J [s-1] of every reaction of ``mechanism`` at the box.

    Parameters
    ----------
    mechanism : Mechanism
    altitude_m : float
        Altitude of the box [m]; sets its horizon and the layers above/below it.
    albedo : float
        Lambertian albedo of the surface/clouds [1], default 0.3.
    method : "spectral" or "parametric"
    temperature_grid, ozone_grid_DU, sza_grid_deg, wavelength_edges_nm :
        Optional grids of the spectral J table (defaults in
        :mod:`boxchem.photolysis.jtable`).
    cross_sections : mapping, optional
        ``{reaction_id: SpectralData or path}`` overriding the ``data=`` set of
        a reaction (a user's lab spectrum); ``quantum_yields`` likewise.

    Call with ``(sza_deg, ozone_column_DU, temperature_K, distance_factor=1)``
    (arrays broadcast together); returns J with shape
    ``broadcast_shape + (n_reactions,)``, zero in non-photolysis columns.
    """

    def __init__(self, mechanism, *, altitude_m: float, albedo: float = DEFAULT_ALBEDO,
                 method: str = "spectral", temperature_grid=None, ozone_grid_DU=None,
                 sza_grid_deg=None, wavelength_edges_nm=None, cross_sections=None,
                 quantum_yields=None):
        from ..environment.solar import horizon_zenith_angle

        if method not in METHODS:
            raise BoxchemError(f"PhotolysisRates: method={method!r}; valid: {', '.join(METHODS)}")
        if not (0.0 <= float(albedo) <= 1.0):
            raise BoxchemError(f"PhotolysisRates: albedo={albedo!r} must be within 0..1")
        altitude_m = float(altitude_m)
        if not (0.0 <= altitude_m <= 80_000.0):
            raise BoxchemError(f"PhotolysisRates: altitude_m={altitude_m!r} must be within 0..80000 m")
        self.mechanism = mechanism
        self.altitude_m = altitude_m
        self.albedo = float(albedo)
        self.method = method
        self.reaction_ids = tuple(r.id for r in mechanism.reactions)
        self.n_reactions = len(self.reaction_ids)
        self.horizon_deg = float(horizon_zenith_angle(altitude_m))
        cross_sections = dict(cross_sections or {})
        quantum_yields = dict(quantum_yields or {})

        spectral_cols, spectral_reactions = [], []
        param_cols, param_lmn = [], []
        self.source: dict[str, str] = {}      # reaction id -> "spectral" / "parametric"
        #: reaction id -> what a partial user spectrum did (spliced / zero outside)
        self.data_notes: dict[str, str] = {}
        #: reaction id -> the cross-section data set its J came from, with any note
        self.data_used: dict[str, str] = {}
        #: the same for the user spectra given here (cross_sections=), not in the mechanism:
        #: (reaction id, note) for the caller to report (the mechanism's own are its warnings)
        self.notices: list[tuple[str, str]] = []
        scale = np.zeros(self.n_reactions)
        for i, r in enumerate(mechanism.reactions):
            if r.law != "photolysis":
                continue
            scale[i] = float(r.parameters.get("scale", 1.0))
            lmn = _lmn(r)
            has_data = "data" in r.parameters or r.id in cross_sections
            if method == "spectral" and has_data:
                spectral_cols.append(i)
                spectral_reactions.append(r)
                continue
            if lmn is None:
                raise BoxchemError(f"reaction {r.id!r}: method='parametric' needs l= m= n=, "
                                   f"but the reaction has only data={r.parameters.get('data')!r}")
            param_cols.append(i)
            param_lmn.append(lmn)
            self.source[r.id] = "parametric"

        self.table = None
        if spectral_reactions:
            from .jtable import build_jtable
            table, notes = build_jtable(
                spectral_reactions, altitude_m=altitude_m, albedo=self.albedo,
                temperature_grid=temperature_grid, ozone_grid_DU=ozone_grid_DU,
                sza_grid_deg=sza_grid_deg, wavelength_edges_nm=wavelength_edges_nm,
                cross_sections=cross_sections, quantum_yields=quantum_yields)
            for r in spectral_reactions:
                self.source[r.id] = "spectral"
            self.data_notes = dict(notes)
            for r in spectral_reactions:
                used = str(cross_sections.get(r.id, r.parameters.get("data")))
                self.data_used[r.id] = used + (f" ({notes[r.id]})" if r.id in notes else "")
            self.notices = [(rid, note) for rid, note in notes.items() if rid in cross_sections]
            self.table = table
            self._spectral_cols = np.asarray(spectral_cols, dtype=np.intp)
            self._spectral_scale = scale[self._spectral_cols]
        else:
            self._spectral_cols = np.zeros(0, dtype=np.intp)
            self._spectral_scale = np.zeros(0)

        self._param_cols = np.asarray(param_cols, dtype=np.intp)
        lmn = np.asarray(param_lmn, dtype=float).reshape(-1, 3)
        with np.errstate(divide="ignore"):
            self._log_l = np.log(lmn[:, 0] * scale[self._param_cols])
        self._m = lmn[:, 1]
        self._n = lmn[:, 2]
        # air mass on a fine SZA grid up to just below the horizon (the Chapman
        # function is cheap but not free; the lookup is a single np.interp)
        self._chi_grid = np.arange(0.0, self.horizon_deg, _AIRMASS_STEP_DEG)
        self._airmass_grid = parametric_air_mass(self._chi_grid, altitude_m)

    # ------------------------------------------------------------------
    def air_mass(self, sza_deg):
        """Air mass a(chi, z) used by the parametric form [1] (inf beyond the horizon)."""
        sza = np.asarray(sza_deg, dtype=float)
        a = np.interp(sza, self._chi_grid, self._airmass_grid)
        return np.where(sza >= self.horizon_deg, np.inf, a)

    def parametric(self, sza_deg):
        """J of the parametric columns [s-1], shape sza.shape + (n_parametric,), at 1 AU."""
        sza = np.asarray(sza_deg, dtype=float)
        lit = sza < self.horizon_deg
        a = np.interp(sza, self._chi_grid, self._airmass_grid)[..., None]
        j = np.exp(self._log_l - self._m * np.log(a) - self._n * a)
        return np.where(lit[..., None] | np.isnan(sza)[..., None], j, 0.0)

    def __call__(self, sza_deg, ozone_column_DU=300.0, temperature_K=220.0, distance_factor=1.0):
        """J [s-1] of every reaction: shape broadcast(inputs).shape + (n_reactions,).

        ``sza_deg`` [deg], ``ozone_column_DU`` [DU], ``temperature_K`` [K],
        ``distance_factor`` (1 AU / r)^2 [1]; arrays broadcast together.
        """
        sza = np.asarray(sza_deg, dtype=float)
        if sza.ndim or np.ndim(ozone_column_DU) or np.ndim(temperature_K) or np.ndim(distance_factor):
            sza, ozone, temp, dist = np.broadcast_arrays(
                sza, np.asarray(ozone_column_DU, dtype=float),
                np.asarray(temperature_K, dtype=float), np.asarray(distance_factor, dtype=float))
            dist = dist[..., None]
        else:
            ozone, temp, dist = float(ozone_column_DU), float(temperature_K), float(distance_factor)
        out = np.zeros(sza.shape + (self.n_reactions,))
        if self._param_cols.size:
            out[..., self._param_cols] = self.parametric(sza)
        if self._spectral_cols.size:
            out[..., self._spectral_cols] = self.table(sza, ozone, temp) * self._spectral_scale
        out *= dist
        return out
