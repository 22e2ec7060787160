"""Shared fixtures.  Signals are synthesised in the tests; nothing is downloaded."""

from __future__ import annotations

import numpy as np
import pytest

#: modules whose module-scoped fixtures (generated masters, corpora, measured files) cost many
#: seconds: under ``pytest -n N --dist loadgroup`` (``make test``) each runs on one worker, so
#: the fixture is built once instead of once per worker
ONE_WORKER_MODULES = ("test_demo.py", "test_sampling_corpus.py", "test_block_size.py", "test_batch.py")


def pytest_collection_modifyitems(config, items):
    for item in items:
        name = item.path.name
        if name in ONE_WORKER_MODULES:
            item.add_marker(pytest.mark.xdist_group(name))


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)
