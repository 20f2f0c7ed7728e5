"""Write tests/data/disort_reference.json: DISORT's actinic flux on the model's own layers.

DISORT (Stamnes et al. 1988, Appl. Opt. 27, 2502) from PyPI's ``pydisort`` (``pip install
'.[reference]'``; it pulls in torch, about 7 GB with its CUDA libraries, so the test suite
reads this stored output instead of running it).  Rerun when the model atmosphere, its
Rayleigh cross sections or its O3/O2 absorption change (tests/test_actinic_reference.py then
fails and says so).  Run: PYTHONPATH=. python scripts/disort_reference.py
"""
import datetime
import json
import sys
from importlib.metadata import version
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
import disort_cases as cases  # noqa: E402

OUT = Path(__file__).resolve().parents[1] / "tests" / "data" / "disort_reference.json"


def main(out=OUT):
    records = {}
    for name, altitude, sza, albedo, absorbing in cases.CASES:
        inputs = cases.case_inputs(altitude, sza, albedo, absorbing)
        direct, total = cases.disort_at_level(inputs)
        records[name] = {"altitude_m": altitude, "sza_deg": sza, "albedo": albedo, "absorbing": absorbing,
                         "edges_nm": inputs["edges"].tolist(), "dtau": inputs["dtau"].tolist(),
                         "w0": inputs["w0"].tolist(), "mu0": inputs["mu0"], "level": inputs["level"],
                         "disort_direct": direct.tolist(), "disort_total": total.tolist()}
        print(f"{name}: {len(direct)} bins")
    meta = {"solver": "DISORT (Stamnes, Tsay, Wiscombe and Jayaweera 1988, Appl. Opt. 27, 2502)",
            "package": f"pydisort {version('pydisort')}", "streams": cases.STREAMS,
            "quantities": "direct and total (direct + diffuse, up + down) actinic flux at the top of "
                          "layer 'level', per unit extraterrestrial flux",
            "written": datetime.date.today().isoformat(), "script": "scripts/disort_reference.py"}
    tmp = Path(str(out) + ".tmp")
    tmp.write_text(json.dumps({"meta": meta, "cases": records}, indent=0))
    tmp.replace(out)
    print(out)


if __name__ == "__main__":
    main(*sys.argv[1:])
