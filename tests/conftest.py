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


def _saved_results(root):
    """Every result object saved as JSON below ``root`` (measure/check results, not summaries)."""
    import json
    import os
    for folder, _dirs, files in os.walk(root):
        for name in files:
            if not name.endswith(".json"):
                continue
            path = os.path.join(folder, name)
            try:
                with open(path, encoding="utf-8") as f:
                    data = json.load(f)
            except (OSError, ValueError):
                continue
            if isinstance(data, dict) and isinstance(data.get("tool"), dict) and isinstance(data.get("file"), dict) \
                    and ("measurements" in data or "findings" in data):
                yield path, data


def _schema_errors(root) -> list[str]:
    import jsonschema
    from masterqc.contract import RESULT_FORMAT_VERSION
    from masterqc.schema import result_schema
    validator = jsonschema.Draft202012Validator(result_schema())
    out = []
    for path, data in _saved_results(root):
        if data.get("result_format") != RESULT_FORMAT_VERSION:
            continue  # an older saved result written on purpose (upgrade tests)
        errors = sorted(validator.iter_errors(data), key=lambda e: list(e.path))
        if errors:
            out.append(f"{path}: {errors[0].message} at {'/'.join(map(str, errors[0].path))}")
    return out


@pytest.fixture(scope="session", autouse=True)
def _every_result_saved_by_a_module_fixture_fits_the_schema(tmp_path_factory):
    """The same for results written into module- and session-scoped folders (generated corpora,
    batch runs shared by a module's tests): checked once, when the session ends."""
    yield
    root = tmp_path_factory.getbasetemp()
    assert _schema_errors(root) == []


@pytest.fixture(autouse=True)
def _every_saved_result_fits_the_schema(request):
    """House rule of the result contract: every result a test saves validates against the
    schema ``masterqc schema result`` prints (generated from masterqc.contract's models)."""
    root = request.getfixturevalue("tmp_path") if "tmp_path" in request.fixturenames else None
    yield
    if root is None:
        return
    errors = _schema_errors(root)
    assert not errors, errors[0]
