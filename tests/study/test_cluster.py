"""The study on a Dask cluster gives the same results as the local run (issue: cluster backend).

A ``dask.distributed.LocalCluster`` on loopback stands in for a real cluster; the study reaches
it by its scheduler address exactly as ``robustff run --cluster tcp://HOST:PORT`` does.
"""

from __future__ import annotations

import numpy as np
import pytest

from robustff.case import parse_case
from robustff.study import run_study

distributed = pytest.importorskip(
    "distributed", reason="dask.distributed (the 'cluster' extra) is not installed"
)

CASE = """
title = "Cluster check loop (fictional)"
time_unit = "min"

[process]
model = "fopdt"
gain = 1.5
time_constant = 8.0
dead_time = 1.5

[disturbance]
model = "sopdt"
gain = -0.8
time_constant = 6.0
time_constant_2 = 2.0
dead_time = 2.5

[feedforward]
structure = "lead-lag-delay"

[simulation]
duration = 80.0
step = 0.2

[[event]]
kind = "disturbance-step"
at = 2.0
size = 5.0

[[event]]
kind = "disturbance-noise"
at = 0.0
size = 0.3
time_constant = 1.0

[uncertainty]
"process.gain" = { relative = 0.3 }
"process.dead_time" = { uniform = [1.0, 2.5] }
"disturbance.gain" = { normal = [-0.8, 0.1] }

[study]
samples = 1200
seed = 77
sampling = "lhs"
"""


@pytest.fixture(scope="module")
def cluster():
    # protocol="tcp": with processes=False Dask would otherwise use its in-process transport,
    # which is not what a real "--cluster tcp://HOST:PORT" user reaches.
    with distributed.LocalCluster(
        n_workers=1, threads_per_worker=2, processes=False, protocol="tcp", host="127.0.0.1",
        dashboard_address=None,
    ) as local:
        yield local


def test_cluster_run_equals_local_run(cluster) -> None:
    case = parse_case(CASE)
    local = run_study(case, jobs=1, chunk_size=300)
    remote = run_study(case, cluster=cluster.scheduler_address, chunk_size=300)
    assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
    assert not remote.partial and remote.samples == local.samples == 1200
    np.testing.assert_array_equal(remote.parameters, local.parameters)
    for name, values in local.metrics.items():
        np.testing.assert_array_equal(remote.metrics[name], values, err_msg=name)
    np.testing.assert_array_equal(remote.unstable, local.unstable)
    np.testing.assert_array_equal(remote.envelope_counts, local.envelope_counts)
    # Noise is on, so equality also shows the per-chunk noise seeds travel with the chunks.
    assert np.std(local.metrics["valve_travel"][:, 0]) > 0
