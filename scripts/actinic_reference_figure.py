"""Figure for docs/photolysis.md: the model's actinic flux / DISORT's on the same layers.

DISORT (Stamnes et al. 1988, Appl. Opt. 27, 2502; PyPI ``pydisort``, ``pip install '.[reference]'``)
through the wrapper of tests/disort_cases.py.  Pure Rayleigh atmosphere, box at 24 km, SZA 30 deg, albedo
0 and 0.3, 300-420 nm in 5 nm bins; two and four source-function iterations.
Run: PYTHONPATH=. python scripts/actinic_reference_figure.py [out.png]
"""
import sys
from pathlib import Path

import matplotlib
matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
import disort_cases as cases  # noqa: E402
import boxchem.photolysis.actinic as actinic  # noqa: E402


def main(out="docs/figures/actinic_vs_disort.png"):
    edges = np.arange(300.0, 421.0, 5.0)
    centres = 0.5 * (edges[1:] + edges[:-1])
    fig, axes = plt.subplots(1, 2, figsize=(10, 4), sharey=True)
    saved = actinic.SOURCE_ITERATIONS
    for ax, part in zip(axes, ("total", "diffuse")):
        for iterations, style in ((2, "--"), (4, "-")):
            actinic.SOURCE_ITERATIONS = iterations
            for albedo, colour in ((0.0, "C0"), (0.3, "C1")):
                d, s = cases.model_flux(24_000.0, 30.0, albedo, False, edges)
                rd, rt = cases.disort_at_level(cases.case_inputs(24_000.0, 30.0, albedo, False, edges))
                ratio = (d + s) / rt if part == "total" else s / (rt - rd)
                ax.plot(centres, ratio, style, color=colour, label=f"albedo {albedo}, {iterations} iterations")
        ax.axhline(1.0, color="k", lw=0.5)
        ax.set_xlabel("wavelength [nm]")
        ax.set_title(f"{part} actinic flux, model / DISORT")
    actinic.SOURCE_ITERATIONS = saved
    axes[0].set_ylabel("ratio [1]")
    axes[1].legend(fontsize=8)
    fig.suptitle("Pure Rayleigh atmosphere, 24 km, SZA 30 deg (DISORT: Stamnes et al. 1988, 32 streams)")
    fig.tight_layout()
    fig.savefig(out, dpi=100)
    print(out)


if __name__ == "__main__":
    main(*sys.argv[1:])
