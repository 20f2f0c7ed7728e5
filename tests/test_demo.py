"""``boxchem demo``: a shortened run writes the netCDF, the figures and the summary."""
from __future__ import annotations

import re

import pytest
import xarray as xr

from boxchem.cli import main
from boxchem.commands.demo import DEFAULT_DIR_NAME, choose_output_dir

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"   # the PNG file signature (PNG specification, ISO/IEC 15948)


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo") / "out"
    status = main(["demo", str(out), "--days", "2", "--quiet"])
    assert status == 0
    return out


def test_demo_writes_result_figures_and_summary(demo_dir):
    nc = demo_dir / "polar-spring.nc"
    assert nc.stat().st_size > 0
    with xr.open_dataset(nc) as ds:
        assert ds.sizes["time"] == 49          # 2 days of hourly output and the start
        assert "O3" in ds["species"].values
    figures = sorted(p.name for p in demo_dir.glob("*.png"))
    assert figures == sorted(["mixing_ratios.png", "diurnal_clo_cl2o2.png", "ozone_loss.png",
                              "chlorine_partitioning.png", "conditions.png"])
    for name in figures:
        data = (demo_dir / name).read_bytes()
        assert data.startswith(PNG_MAGIC) and len(data) > 5000


def test_demo_summary_reports_the_run(demo_dir):
    text = (demo_dir / "summary.txt").read_text()
    assert "polar-spring" in text and "2026-08-01 to 2026-08-03" in text
    assert "Accumulated loss by catalytic cycle" in text and "unattributed" in text
    # the ozone figures quoted agree with the file (common practice, no source)
    with xr.open_dataset(demo_dir / "polar-spring.nc") as ds:
        o3 = ds["mole_fraction"].sel(species="O3").values
        cycles = [str(c) for c in ds["cycle"].values]
    assert any(re.search(rf"^  {c} +[0-9.]+ ppbv", text, re.M) for c in cycles)
    match = re.search(r"Ozone: ([0-9.]+) ppmv at the start, ([0-9.]+) ppmv at the end", text)
    assert match is not None
    assert float(match.group(1)) == pytest.approx(o3[0] * 1e6, abs=0.005)
    assert float(match.group(2)) == pytest.approx(o3[-1] * 1e6, abs=0.005)
    assert "Chlorine activation" in text and "Last PSC surface area" in text


def test_demo_never_overwrites_a_non_empty_folder(tmp_path, capsys):
    target = tmp_path / "taken"
    target.mkdir()
    (target / "keep.txt").write_text("mine")
    assert main(["demo", str(target), "--days", "1", "--quiet"]) == 2
    assert "not empty" in capsys.readouterr().err
    assert (target / "keep.txt").read_text() == "mine"
    assert sorted(p.name for p in target.iterdir()) == ["keep.txt"]


def test_default_folder_is_the_next_free_name(tmp_path):
    assert choose_output_dir(None, cwd=tmp_path) == tmp_path / DEFAULT_DIR_NAME
    (tmp_path / DEFAULT_DIR_NAME).mkdir()
    assert choose_output_dir(None, cwd=tmp_path) == tmp_path / DEFAULT_DIR_NAME   # empty: reused
    (tmp_path / DEFAULT_DIR_NAME / "x").write_text("")
    assert choose_output_dir(None, cwd=tmp_path) == tmp_path / f"{DEFAULT_DIR_NAME}-2"


def test_demo_rejects_non_positive_days(tmp_path, capsys):
    assert main(["demo", str(tmp_path / "d"), "--days", "0"]) == 2
    assert "--days" in capsys.readouterr().err


def test_demo_help_has_an_example(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["demo", "--help"])
    assert exc.value.code == 0
    out = capsys.readouterr().out
    assert "boxchem demo" in out and "--days" in out
