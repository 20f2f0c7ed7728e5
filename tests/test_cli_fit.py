"""`boxchem fit` and `boxchem fit-traces` as a user runs them: outputs, plots, exit status 2 on bad input."""
from pathlib import Path

import numpy as np
import pytest

from boxchem.cli import main
from boxchem.io.labdata import read_rate_table
from boxchem.mechanism import load_mechanism

EXAMPLES = Path(__file__).resolve().parents[1] / "examples" / "lab-fit"


def test_fit_help_has_examples(capsys):
    with pytest.raises(SystemExit):
        main(["fit", "--help"])
    out = capsys.readouterr().out
    assert "examples:" in out and "boxchem fit examples/lab-fit/" in out
    # every example file the help names exists
    import re
    named = re.findall(r"examples/lab-fit/[\w./-]+", out)
    assert named and all((EXAMPLES.parent.parent / p).exists() for p in named)
    with pytest.raises(SystemExit):
        main(["fit-traces", "--help"])
    assert "boxchem fit-traces examples/lab-fit/traces/" in capsys.readouterr().out


def test_fit_arrhenius_writes_a_runnable_mechanism_and_plot(tmp_path, capsys):
    out, png = tmp_path / "cl_o3.mech", tmp_path / "cl_o3.png"
    assert main(["fit", str(EXAMPLES / "cl_o3_lab.csv"), "--law", "arrhenius", "--reaction", "cl_o3",
                 "-o", str(out), "--plot", str(png)]) == 0
    text = capsys.readouterr().out
    # the example's planted outlier (file line 9) is reported with its line
    assert "cl_o3_lab.csv:9:" in text and "outlier" in text
    assert png.stat().st_size > 10_000
    mech = load_mechanism(out)
    r = next(r for r in mech.reactions if r.id == "cl_o3")
    assert r.law == "arrhenius" and r.f298 > 1 and "cl_o3_lab.csv" in r.ref
    # the synthetic file's invented truth is A = 2.6e-11, E/R = 230 K (examples/lab-fit/make_examples.py)
    res = tmp_path / "res.csv"
    assert main(["fit", str(EXAMPLES / "cl_o3_lab.csv"), "--law", "arrhenius", "--residuals", str(res)]) == 0
    import csv
    rows = list(csv.DictReader(line for line in res.read_text().splitlines() if not line.startswith("#")))
    flagged = [r for r in rows if r["outlier"] == "1"]
    # the planted outlier was multiplied by 1.25: above the fit
    assert [r["line"] for r in flagged] == ["9"] and float(flagged[0]["residual_ln"]) > 0.15
    assert main(["fit", str(EXAMPLES / "cl_o3_lab.csv"), "--law", "arrhenius", "--drop-outliers"]) == 0
    text = capsys.readouterr().out
    assert "refitting without the 1 flagged outlier(s)" in text


def test_fit_falloff_and_equilibrium_examples(tmp_path, capsys):
    out = tmp_path / "clo.mech"
    assert main(["fit", str(EXAMPLES / "clo_clo_m_lab.tsv"), "--law", "falloff", "--reaction", "clo_clo_m",
                 "-o", str(out), "--plot", str(tmp_path / "clo.png")]) == 0
    r = next(r for r in load_mechanism(out).reactions if r.id == "clo_clo_m")
    assert r.law == "falloff" and r.parameters["Fc"] == 0.6
    # invented truth k0 = 2.0e-32, n = 3.8 (make_examples.py): recovered within 3 sigma (report)
    assert abs(r.parameters["k0"] / 2.0e-32 - 1) < 0.1 and abs(r.parameters["n"] - 3.8) < 0.4
    out = tmp_path / "eq.mech"
    assert main(["fit", str(EXAMPLES / "cl2o2_equilibrium_lab.txt"), "--law", "equilibrium",
                 "--reaction", "cl2o2_m", "-o", str(out), "--plot", str(tmp_path / "eq.png")]) == 0
    r = next(r for r in load_mechanism(out).reactions if r.id == "cl2o2_m")
    assert r.law == "reverse" and r.parameters["of"] == "clo_clo_m"
    assert abs(r.parameters["B"] - 8600) < 400


def test_fit_traces_then_fit(tmp_path, capsys):
    table = tmp_path / "clo_k.csv"
    files = sorted(str(p) for p in (EXAMPLES / "traces").glob("clo_*.csv"))
    assert main(["fit-traces", *files, "-o", str(table), "--plot", str(tmp_path / "tr.png")]) == 0
    tab = read_rate_table(table)
    assert len(tab) == len(files) and tab.common_rel_sigma == pytest.approx(0.05)
    assert (tmp_path / "tr.png").stat().st_size > 10_000
    assert main(["fit", str(table), "--law", "falloff", "--reaction", "clo_clo_m"]) == 0
    pfo = sorted(str(p) for p in (EXAMPLES / "traces").glob("cl_o3_*"))
    assert main(["fit-traces", *pfo, "--baseline", "--plot", str(tmp_path / "p.png")]) == 0
    out = capsys.readouterr().out
    assert out.count("\n") >= 4 and (tmp_path / "p-kprime.png").exists()
    # invented truth of the example: k = 2.6e-11 exp(-230/T) (make_examples.py)
    rows = [line.split(",") for line in out.splitlines() if line[:1].isdigit()]
    T = np.array([float(r[0]) for r in rows])
    k = np.array([float(r[3]) for r in rows])
    np.testing.assert_allclose(k, 2.6e-11 * np.exp(-230 / T), rtol=0.03)


@pytest.mark.parametrize("args, message", [
    (["fit", "missing.csv", "--law", "arrhenius"], "missing.csv: no such file"),
    (["fit", "{ex}/cl_o3_lab.csv", "--law", "arrhenius", "-o", "x.mech"], "-o needs --reaction"),
    (["fit", "{ex}/cl_o3_lab.csv", "--law", "arrhenius", "--reaction", "cl_03"], "did you mean 'cl_o3'"),
    (["fit", "{ex}/cl_o3_lab.csv", "--law", "falloff"], "needs p or [M]"),
    (["fit", "{ex}/cl_o3_lab.csv", "--law", "arrhenius", "--bath", "He"], "bath gases there: N2"),
    (["fit", "{ex}/cl_o3_lab.csv", "--law", "arrhenius", "--reaction", "clo_clo_m", "-o", "{tmp}/x.mech"],
     "has k in cm6 s-1"),
    (["fit", "{ex}/cl_o3_lab.csv", "--law", "arrhenius", "--plot", "/no/such/dir/f.png"], "does not exist"),
    (["fit", "{bad}", "--law", "arrhenius"], "bad.csv:3:6: 'oops'"),
    (["fit-traces", "{bad}"], "missing condition 'kind = ...'"),
    (["fit", "{ex}/cl_o3_lab.csv", "--law", "arrhenius", "--fix", "n=1"], "--fix n: not a fitted parameter"),
    (["fit", "{ex}/cl_o3_lab.csv", "--law", "arrhenius", "--fix", "A"], "write KEY=NUMBER"),
])
def test_bad_input_exit_2_with_message(tmp_path, capsys, args, message):
    bad = tmp_path / "bad.csv"
    bad.write_text("T [K], k [cm3 molecule-1 s-1]\n200, 1e-11\n210, oops\n")
    args = [a.format(ex=EXAMPLES, tmp=tmp_path, bad=bad) for a in args]
    assert main(args) == 2
    captured = capsys.readouterr()
    assert message in captured.err and "Traceback" not in captured.err
    assert not (tmp_path / "x.mech").exists()


def test_commands_listed_in_main_help(capsys):
    with pytest.raises(SystemExit):
        main(["--help"])
    out = capsys.readouterr().out
    assert "fit-traces" in out and " fit " in out
