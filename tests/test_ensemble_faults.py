"""Long ensembles survive faults: killed workers, time limits, SIGINT and SIGKILL of the parent.

Real processes and real signals on a tiny run (the shipped stratosphere-box scenario for one day).
"""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest

import boxchem
from boxchem.io import memberfile as mf

ROOT = Path(__file__).resolve().parents[1]
MEMBERS = {"run.duration": ["1 d"] * 10,
           "scale.clo_clo_m": [0.8, 0.9, 1.0, 1.1, 1.2, 1.3, 1.4, 1.5, 1.6, 1.7]}


def children(pid: int) -> list[int]:
    """Processes whose parent is ``pid`` (from /proc)."""
    out = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                stat = (entry / "stat").read_text()
            except OSError:
                continue
            if int(stat.rsplit(")", 1)[1].split()[1]) == pid:
                out.append(int(entry.name))
    return out


def alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


def worker_pids(parent: int) -> list[int]:
    pids = []
    for pid in children(parent):
        try:
            if b"boxchem.analysis.worker" in Path(f"/proc/{pid}/cmdline").read_bytes():
                pids.append(pid)
        except OSError:
            pass
    return pids


@pytest.fixture(scope="module")
def reference():
    """The members run in this process, one batch: what every fault-hit run must reproduce
    (per-member step control, so that re-grouping after a fault cannot change a number;
    lock-step groups are identical only when grouped the same)."""
    return boxchem.ensemble("stratosphere-box", MEMBERS, save="mole_fraction", batch_size=10,
                            step_policy="per-member")


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
def test_a_killed_worker_costs_only_a_retry(reference, tmp_path):
    killed = []

    def kill_one_worker():
        deadline = time.time() + 60
        while time.time() < deadline and not killed:
            pids = worker_pids(os.getpid())
            if pids:
                time.sleep(2.0)       # let it start a batch
                os.kill(pids[0], signal.SIGKILL)
                killed.append(pids[0])
            time.sleep(0.05)

    thread = threading.Thread(target=kill_one_worker, daemon=True)
    thread.start()
    ds = boxchem.ensemble("stratosphere-box", MEMBERS, save="mole_fraction", batch_size=2, workers=2,
                          output=tmp_path / "k.nc")
    thread.join()
    assert killed, "no worker process was seen"
    assert ds["member_status"].values.tolist() == [1] * 10
    # members re-run after the fault (as batches of one) give the same values
    np.testing.assert_allclose(ds["mole_fraction"].values, reference["mole_fraction"].values,
                               rtol=1e-12, atol=0)
    assert not worker_pids(os.getpid())     # every worker stopped at the end


def test_member_time_limit_records_the_member_as_failed():
    ds = boxchem.ensemble("stratosphere-box", {"run.duration": ["1 d"] * 2, "scale.clo_clo_m": [1.0, 2.0]},
                          member_time_limit_s=1e-3, save="mole_fraction")
    assert ds["member_status"].values.tolist() == [2, 2]
    message = str(ds["member_message"].values[0])
    assert "exceeded the time limit of 0.001 s" in message and "(retried once)" in message
    assert np.isnan(ds["mole_fraction"]).all()


def _start(tmp_path, *extra):
    table = tmp_path / "members.csv"
    table.write_text("run.duration,scale.clo_clo_m\n" + "".join(
        f"1 d,{f}\n" for f in MEMBERS["scale.clo_clo_m"]))
    out = tmp_path / "out.nc"
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen([sys.executable, "-m", "boxchem", "ensemble", "stratosphere-box",
                             "--members", str(table), "-o", str(out), "--batch-size", "1",
                             "--save", "mole_fraction", *extra],
                            env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            cwd=tmp_path)
    return proc, table, out


def _wait_for_members(proc, out, n: int, timeout_s: float = 300.0) -> None:
    deadline = time.time() + timeout_s
    while time.time() < deadline:
        assert proc.poll() is None, proc.communicate()
        if out.exists():
            try:
                if np.sum(mf.read_member_state(out)["status"] == mf.STATUS_SUCCESS) >= n:
                    return
            except (OSError, ValueError):
                pass
        time.sleep(0.1)
    proc.kill()
    raise AssertionError("the ensemble did not finish members in time")


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
def test_sigint_keeps_finished_members_and_resume_completes_them(reference, tmp_path):
    proc, table, out = _start(tmp_path, "--workers", "2")
    _wait_for_members(proc, out, 2)
    workers = worker_pids(proc.pid)
    t0 = time.time()
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=10)
    assert time.time() - t0 < 3.0                   # ends within a second or two
    assert proc.returncode == 130
    assert "interrupted:" in err and "members finished, kept in" in err and "--resume" in err
    assert "Traceback" not in err
    assert not any(alive(p) for p in workers)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["members.csv", "out.nc"]   # no temporaries
    state = mf.read_member_state(out)                # valid netCDF, finished members kept
    done = state["status"] == mf.STATUS_SUCCESS
    assert 2 <= done.sum() < 10
    # the interrupted run had batches of one (per-member control); the resumed members too
    ds = boxchem.ensemble("stratosphere-box", MEMBERS, output=out, save="mole_fraction", resume=True,
                          step_policy="per-member")
    assert ds["member_status"].values.tolist() == [1] * 10
    np.testing.assert_allclose(ds["mole_fraction"].values, reference["mole_fraction"].values,
                               rtol=1e-12, atol=0)


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
def test_sigkill_of_the_parent_takes_its_workers_and_leaves_a_valid_file(tmp_path):
    proc, table, out = _start(tmp_path, "--workers", "2")
    _wait_for_members(proc, out, 1)
    workers = worker_pids(proc.pid)
    assert workers
    proc.send_signal(signal.SIGKILL)
    proc.communicate(timeout=10)
    deadline = time.time() + 3.0
    while time.time() < deadline and any(alive(p) for p in workers):
        time.sleep(0.05)
    assert not any(alive(p) for p in workers)       # workers die with their parent
    state = mf.read_member_state(out)
    assert np.sum(state["status"] == mf.STATUS_SUCCESS) >= 1
    ds = mf.open_member_file(out, load=True)
    ok = ds["member_status"].values == mf.STATUS_SUCCESS
    assert np.isfinite(ds["mole_fraction"].values[ok]).all()
    assert np.isnan(ds["mole_fraction"].values[~ok]).all()


def test_interrupts_during_a_write_are_delivered_after_it():
    done = []
    with pytest.raises(KeyboardInterrupt):
        with mf.deferred_interrupts():
            os.kill(os.getpid(), signal.SIGINT)
            time.sleep(0.05)
            done.append("the write finished")
    assert done == ["the write finished"]
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler


def test_single_run_files_remove_temporaries_of_crashed_writers(tmp_path):
    import xarray as xr
    from boxchem.io.netcdf import write_dataset
    out = tmp_path / "run.nc"
    stale = tmp_path / f".run.nc.{2**22 + 777}.k3j.tmp"     # beyond pid_max: its writer is gone
    stale.write_bytes(b"cut short")
    write_dataset(xr.Dataset({"x": ("t", np.arange(3.0))}), out)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run.nc"]
