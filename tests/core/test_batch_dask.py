"""The same ledger analysed on the local pool and on a Dask cluster gives the same results."""

from __future__ import annotations

import importlib.util

import pytest

from phasewise.core.analysis import AnalysisSettings
from phasewise.core.batch import analyse_ledger
from phasewise.core.ledger import Ledger
from phasewise.core.periodogram import PeriodogramSettings
from phasewise.core.synthetic import synthetic_field
from tests.core.test_batch import assert_same

pytestmark = [
    pytest.mark.dask,
    pytest.mark.slow,
    pytest.mark.skipif(
        importlib.util.find_spec("distributed") is None, reason="distributed is not installed"
    ),
]

FAST = AnalysisSettings(periodogram=PeriodogramSettings(fmax=3.0, oversampling=3))


def _results(path):
    with Ledger.open(path, readonly=True) as ledger:
        return {s: ledger.result(s) for s in ledger.star_ids()}


def test_local_pool_and_dask_cluster_agree(tmp_path):
    from distributed import LocalCluster

    lcs = synthetic_field(4, n_epochs=100, seed=21).lightcurves()
    paths = {}
    for name in ("local", "dask"):
        paths[name] = tmp_path / f"{name}.ledger.sqlite"
        with Ledger.create(paths[name]) as ledger:
            ledger.add_stars(lcs)
    local = analyse_ledger(paths["local"], FAST, workers=2, chunk_size=2)
    # a real scheduler and worker on the loopback interface, the worker in this process
    with LocalCluster(
        n_workers=1,
        threads_per_worker=2,
        processes=False,
        host="127.0.0.1",
        protocol="tcp",  # not the in-process transport: a real network scheduler
        dashboard_address=None,
    ) as cluster:
        assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
        remote = analyse_ledger(
            paths["dask"], FAST, scheduler=cluster.scheduler_address, chunk_size=2
        )
    assert remote.engine == "dask" and remote.workers == 2
    assert local.analysed + local.failed == remote.analysed + remote.failed == 4
    assert local.analysed == remote.analysed >= 3
    assert local.failures == remote.failures  # a failed analysis fails the same way
    a, b = _results(paths["local"]), _results(paths["dask"])
    assert a.keys() == b.keys()
    for star_id in a:
        assert a[star_id].settings_hash == b[star_id].settings_hash == FAST.hash
        assert (a[star_id].failed, a[star_id].error) == (b[star_id].failed, b[star_id].error)
        # BLAS may block sums differently with other thread counts: floats to 1e-9
        assert_same(a[star_id].result, b[star_id].result, path=star_id, rtol=1e-9)


def test_unreachable_scheduler_is_a_clear_error(tmp_path, monkeypatch):
    from phasewise import core
    from phasewise.core.errors import PhasewiseError

    monkeypatch.setattr(core.batch, "SCHEDULER_TIMEOUT", 1.0)
    path = tmp_path / "x.ledger.sqlite"
    with Ledger.create(path) as ledger:
        ledger.add_stars(synthetic_field(2, n_epochs=30, seed=1).lightcurves())
    with pytest.raises(
        PhasewiseError, match="cannot reach the Dask scheduler at tcp://127.0.0.1:9"
    ):
        analyse_ledger(path, FAST, scheduler="tcp://127.0.0.1:9")
    with Ledger.open(path, readonly=True) as ledger:
        assert ledger.settings_hash is None  # a run that never started changed nothing


def _worker_environment():
    import os

    import dask

    seen = {name: os.environ.get(name) for name in ("MALLOC_TRIM_THRESHOLD_", "OMP_NUM_THREADS")}
    seen["profile"] = dask.config.get("distributed.worker.profile.enabled")
    return seen


def test_project_config_keeps_malloc_trim_out_of_worker_processes(monkeypatch):
    # distributed's default nanny environment sets MALLOC_TRIM_THRESHOLD_=65536
    # (distributed.yaml, distributed.nanny.pre-spawn-environ); ours removes it
    import dask
    from distributed import Client, LocalCluster

    from phasewise.core.batch import DASK_WORKER_CONFIG

    monkeypatch.delenv("MALLOC_TRIM_THRESHOLD_", raising=False)  # the nanny copies it here too
    seen = {}
    for name, config in (("default", {}), ("project", DASK_WORKER_CONFIG)):
        with (
            dask.config.set(config),
            LocalCluster(
                n_workers=1,
                threads_per_worker=1,
                processes=True,
                host="127.0.0.1",
                dashboard_address=None,
            ) as cluster,
            Client(cluster) as client,
        ):
            (seen[name],) = client.run(_worker_environment).values()
        monkeypatch.delenv("MALLOC_TRIM_THRESHOLD_", raising=False)
    assert seen["default"]["MALLOC_TRIM_THRESHOLD_"] == "65536"  # the check can fail
    assert seen["project"]["MALLOC_TRIM_THRESHOLD_"] is None
    assert seen["project"]["OMP_NUM_THREADS"] == "1"  # the rest of the nanny's set stays
    # the worker process itself runs without the 10 ms stack sampler
    assert seen["default"]["profile"] is True
    assert seen["project"]["profile"] is False
