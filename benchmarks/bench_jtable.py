"""Time to build a run's J tables for the shipped mechanism and the per-step cost of J.

Usage: python benchmarks/bench_jtable.py
"""
from __future__ import annotations

import time
import timeit
import warnings

import numpy as np

from boxchem.mechanism import load_mechanism
from boxchem.photolysis.jtable import _cached_flux_grid
from boxchem.photolysis.rates import PhotolysisRates


def main() -> None:
    mech = load_mechanism("stratosphere")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t0 = time.perf_counter()
        PhotolysisRates(mech, altitude_m=20_000.0)                # first build: reads data files
        t1 = time.perf_counter()
        builds, reuse = [], []
        for _ in range(3):
            _cached_flux_grid.cache_clear()                       # recompute the actinic flux grid
            s = time.perf_counter()
            rates = PhotolysisRates(mech, altitude_m=20_000.0)
            builds.append(time.perf_counter() - s)
            s = time.perf_counter()
            PhotolysisRates(mech, altitude_m=20_000.0)            # same place: flux grid reused
            reuse.append(time.perf_counter() - s)
        param = PhotolysisRates(mech, altitude_m=20_000.0, method="parametric")
    n_spec = sum(v == "spectral" for v in rates.source.values())
    table = rates.table
    print(f"reactions: {len(rates.source)} photolysis ({n_spec} spectral); table grid "
          f"{table.sza_deg.size} SZA x {table.ozone_DU.size} ozone x {table.temperature_K.size} T")
    print(f"J table build, first (incl. reading data files): {t1 - t0:.3f} s")
    print(f"J table build, cached data (best of 3):          {min(builds):.3f} s")
    print(f"J table build, same place again (flux reused):   {min(reuse):.3f} s")
    n = 20000
    per_call = timeit.timeit(lambda: rates(63.0, 280.0, 205.0), number=n) / n
    per_param = timeit.timeit(lambda: param(63.0, 280.0, 205.0), number=n) / n
    print(f"per-step J (scalar SZA, spectral table):  {per_call * 1e6:.1f} us")
    print(f"per-step J (scalar SZA, parametric only): {per_param * 1e6:.1f} us")
    sza = np.linspace(0.0, 100.0, 1000)
    batch = timeit.timeit(lambda: rates(sza, 280.0, 205.0), number=50) / 50
    print(f"1000 SZA values in one call: {batch * 1e3:.2f} ms ({batch * 1e6 / sza.size:.2f} us each)")


if __name__ == "__main__":
    main()
