"""The dask.distributed back-end: a real LocalCluster with two worker processes."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import boxchem

distributed = pytest.importorskip("distributed")

CHAIN = Path(__file__).parent / "data" / "runner_chain.toml"
MEMBERS = {"scale.a_to_b": [0.3, 1.0, 2.0, 4.0, 1.5, 0.7],
           "initial.A": [1e-9, 2e-9, 1e-9, 3e-9, 1e-9, 5e-10],
           "location.latitude": [-70.0, -70.0, -70.0, -60.0, -60.0, -60.0]}


def test_local_cluster_gives_the_in_process_numbers(tmp_path):
    reference = boxchem.ensemble(CHAIN, MEMBERS, batch_size=2, save="number_density")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        ds = boxchem.ensemble(CHAIN, MEMBERS, batch_size=2, save="number_density", client=client,
                              output=tmp_path / "dask.nc")
        assert ds["member_status"].values.tolist() == [1] * 6
        # same batches, same numbers: identical to 1e-12 relative (DEVELOPERS.md, "Ensemble engine")
        np.testing.assert_allclose(ds["number_density"].values, reference["number_density"].values,
                                   rtol=1e-12, atol=0)
        ds.close()
        # by address, as `--scheduler tcp://HOST:PORT` does
        by_address = boxchem.ensemble(CHAIN, MEMBERS, batch_size=3, save="number_density",
                                      scheduler=cluster.scheduler_address)
        np.testing.assert_allclose(by_address["number_density"].values,
                                   reference["number_density"].values, rtol=1e-12, atol=0)


def test_unreachable_scheduler_is_a_clear_error():
    with pytest.raises(boxchem.BoxchemError, match="cannot connect to the dask scheduler"):
        boxchem.ensemble(CHAIN, {"scale.a_to_b": [1.0]}, scheduler="tcp://127.0.0.1:1")
