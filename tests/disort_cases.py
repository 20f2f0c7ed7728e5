"""The cases of the actinic-flux check against DISORT, shared by the test and its scripts.

DISORT: the discrete-ordinates solver of Stamnes, Tsay, Wiscombe and Jayaweera (1988),
Appl. Opt. 27, 2502, doi:10.1364/AO.27.002502, as packaged on PyPI (``pydisort``,
``pip install '.[reference]'``).  It is run on exactly the layers of the model atmosphere
(vertical optical depth and single-scattering albedo of each layer, Rayleigh phase-function
moments, Lambertian ground) with 32 streams.  Its mean intensity (direct + diffuse, up and
down) times 4 pi is the actinic flux per unit extraterrestrial flux.

``case_inputs`` builds a case's layers from the model; ``disort_at_level`` runs DISORT on
them (needs pydisort); ``model_flux`` is the model's flux for the same case.  The stored
reference (tests/data/disort_reference.json, written by scripts/disort_reference.py) holds
the inputs and DISORT's output, so the check runs without the 7 GB of pydisort's torch.
"""
import numpy as np

STREAMS = 32
RAYLEIGH_EDGES = np.arange(300.0, 421.0, 20.0)
#: (name, altitude m, SZA deg, albedo, absorbers): the pure-Rayleigh cases and the balloon case
#: of docs/photolysis.md (24 km, SZA 30, 300 DU, O3 + O2 absorption, 290-440 nm)
CASES = [(f"rayleigh_{int(a / 1000)}km_sza{int(s)}_albedo{al}", a, s, al, False)
         for a, s, al in [(24_000.0, 30.0, 0.0), (24_000.0, 30.0, 0.3), (24_000.0, 60.0, 0.0),
                          (24_000.0, 60.0, 0.3), (10_000.0, 60.0, 0.3), (32_000.0, 30.0, 0.0)]] + \
        [(f"balloon_24km_sza30_albedo{al}", 24_000.0, 30.0, al, True) for al in (0.0, 0.3)]
OZONE_DU = 300.0


def case_inputs(altitude_m, sza, albedo, absorbing, edges=None):
    """The layers of a case: dict of edges [nm], dtau and w0 (n_bins, n_layers, top first),
    mu0, albedo and the box's level (index of the layer whose top is the box)."""
    from boxchem.photolysis.actinic import O2_MOLE_FRACTION, _absorber_cross_sections, layered_atmosphere
    from boxchem.photolysis.rayleigh import rayleigh_cross_section
    from boxchem.photolysis.spectrum import model_wavelength_edges

    atm = layered_atmosphere(altitude_m)
    if edges is None:
        if absorbing:
            edges = model_wavelength_edges()
            edges = edges[(edges >= 290.0) & (edges <= 440.0)]
        else:
            edges = RAYLEIGH_EDGES
    centres = 0.5 * (edges[1:] + edges[:-1])
    tau_sca = atm.air_column[:, None] * rayleigh_cross_section(centres)[None, :]
    if absorbing:
        sigma_o3, sigma_o2 = _absorber_cross_sections(edges, atm.temperature_K, ("O3", "O2"), None)
        tau_abs = OZONE_DU * atm.ozone_column_unit[:, None] * sigma_o3 + \
            (O2_MOLE_FRACTION * atm.air_column)[:, None] * sigma_o2
    else:
        tau_abs = np.zeros_like(tau_sca)
    dtau = (tau_abs + tau_sca).T
    return {"edges": np.asarray(edges, dtype=float), "dtau": dtau, "w0": (tau_sca.T / dtau),
            "mu0": float(np.cos(np.radians(sza))), "albedo": float(albedo), "level": int(atm.box_level)}


def model_flux(altitude_m, sza, albedo, absorbing, edges):
    """The model's (direct, diffuse) actinic flux of a case per unit extraterrestrial flux."""
    from boxchem.photolysis.actinic import flux_grid
    from boxchem.photolysis.spectrum import extraterrestrial_flux

    kwargs = {} if absorbing else {"absorbers": ()}
    d, s = flux_grid([sza], altitude_m, [OZONE_DU], albedo=albedo, wavelength_edges_nm=edges,
                     components=True, **kwargs)
    f0 = extraterrestrial_flux(edges)
    return d[0, 0] / f0, s[0, 0] / f0


def disort_at_level(inputs):
    """DISORT (Stamnes et al. 1988) at the top of layer ``level``: (direct, total) actinic flux
    per unit extraterrestrial flux, one value a bin."""
    import pydisort
    import torch

    torch.set_num_threads(1)
    dtau, w0, mu0 = inputs["dtau"], inputs["w0"], inputs["mu0"]
    n_bins, n_lay = dtau.shape
    direct, total = np.empty(n_bins), np.empty(n_bins)
    f64 = torch.float64
    for i in range(n_bins):
        op = pydisort.DisortOptions().flags("usrtau,lamber,quiet,onlyfl")
        op.ds().nlyr, op.ds().nstr, op.ds().nmom, op.ds().nphase = n_lay, STREAMS, STREAMS, STREAMS
        op.nwave(1).ncol(1)
        op.user_tau(np.array([float(dtau[i, :inputs["level"]].sum())]))
        solver = pydisort.Disort(op)
        prop = torch.zeros((1, 1, n_lay, 2 + STREAMS), dtype=f64)
        prop[..., 0] = torch.tensor(dtau[i], dtype=f64)
        prop[..., 1] = torch.tensor(np.minimum(w0[i], 1.0 - 1e-9), dtype=f64)   # DISORT wants w0 < 1
        prop[..., 2:] = pydisort.scattering_moments(STREAMS, "rayleigh")
        solver.forward(prop, umu0=torch.tensor([mu0], dtype=f64), phi0=torch.tensor([0.0], dtype=f64),
                       fbeam=torch.tensor([[1.0]], dtype=f64),
                       albedo=torch.tensor([[inputs["albedo"]]], dtype=f64),
                       fluor=torch.zeros((1, 1), dtype=f64), fisot=torch.zeros((1, 1), dtype=f64))
        out = solver.gather_flx()[0, 0, 0].numpy()      # rfldir, fldn, flup, dfdt, uavg, ...
        direct[i] = out[pydisort.kIRFLDIR] / mu0
        total[i] = 4.0 * np.pi * out[pydisort.kIUAVG]
    return direct, total
