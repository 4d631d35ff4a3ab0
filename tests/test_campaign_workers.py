"""The local cluster's worker processes: the environment they start with."""

from __future__ import annotations

import os

import pytest

from harbourwatch.campaign.schedule import WORKER_ENV, open_runner


def test_local_workers_get_one_thread_per_pool_and_the_default_allocator(
        monkeypatch: pytest.MonkeyPatch) -> None:
    for k in WORKER_ENV:  # the user's own settings would win over ours
        monkeypatch.delenv(k, raising=False)
    before = dict(os.environ)
    with open_runner(scheduler=None, n_workers=1, progress=False) as runner:
        seen = {k: list(runner.client.run(os.getenv, k).values()) for k in WORKER_ENV}
    # dask's own default would start the worker with MALLOC_TRIM_THRESHOLD_=65536
    assert seen == {k: [v] for k, v in WORKER_ENV.items()}
    assert seen["MALLOC_TRIM_THRESHOLD_"] == [None]
    assert seen["OPENBLAS_NUM_THREADS"] == ["1"]
    # the nanny writes the variables into this process before spawning: put back
    assert dict(os.environ) == before
