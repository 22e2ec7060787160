"""Shared fixtures.  Signals are synthesised in the tests; nothing is downloaded."""

from __future__ import annotations

import numpy as np
import pytest

#: modules whose module-scoped fixtures (generated masters, corpora, measured files) cost many
#: seconds: under ``pytest -n N --dist loadgroup`` (``make test``) each runs on one worker, so
#: the fixture is built once instead of once per worker
ONE_WORKER_MODULES = ("test_demo.py", "test_sampling_corpus.py", "test_block_size.py", "test_batch.py")


#: bench-like tests, skipped unless ``--run-heavy`` (``make test-heavy``): (module, fixture, parameter ids).
#: The command-line slices of the two tuning corpora: the tuning sets are also scored in process as slices
#: (tests/test_bandwidth.py, tests/test_aliasing.py) and in full in bench/; the held-back validation
#: corpus keeps its command-line slice in ``make test``.
HEAVY_PARAMS = (("test_sampling_validation_slice.py", "slice_tally",
                 ("corpus_tuning_upsampling", "corpus_tuning_aliasing")),)


def pytest_addoption(parser):
    parser.addoption("--run-heavy", action="store_true", default=False,
                     help="also run the bench-like tests marked heavy (skipped by default)")


def pytest_configure(config):
    config.addinivalue_line("markers", "heavy: bench-like; skipped unless --run-heavy (make test-heavy)")


def _heavy(item) -> bool:
    callspec = getattr(item, "callspec", None)
    for module, fixture, ids in HEAVY_PARAMS:
        if item.path.name == module and callspec is not None and fixture in callspec.params:
            if any(i in callspec.id.split("-") for i in ids):
                return True
    return False


def _shared_fixture_group(item):
    """``module[param]`` when the test uses a module- or session-scoped fixture defined in its own module
    (a generated corpus, a measured master), else None; ``param`` names the parameter of such a fixture
    when it is parametrised, so each parameter's tests form their own group."""
    info = getattr(item, "_fixtureinfo", None)
    if info is None:
        return None
    scoped = sorted(name for name, defs in info.name2fixturedefs.items()
                    if defs[-1].scope in ("module", "session") and defs[-1].baseid.endswith(".py"))
    if not scoped:
        return None
    callspec = getattr(item, "callspec", None)
    params = [f"{n}={callspec.indices[n]}" for n in scoped if callspec is not None and n in callspec.params]
    return f"{item.path.name}[{','.join(params)}]"


def pytest_collection_modifyitems(config, items):
    """Under ``pytest -n N --dist loadgroup`` (``make test``), the tests that share an expensive fixture run
    on one worker, so it is built once, not once per worker: whole modules (ONE_WORKER_MODULES), and else
    the tests using one module- or session-scoped fixture of their module (per parameter of that fixture,
    so a parametrised corpus fixture still spreads over the workers)."""
    run_heavy = config.getoption("--run-heavy")
    for item in items:
        if _heavy(item):
            item.add_marker(pytest.mark.heavy)
        if item.get_closest_marker("heavy") is not None and not run_heavy:
            item.add_marker(pytest.mark.skip(reason="bench-like (heavy): run with --run-heavy or make test-heavy"))
            continue
        name = item.path.name
        if name in ONE_WORKER_MODULES:
            item.add_marker(pytest.mark.xdist_group(name))
            continue
        group = _shared_fixture_group(item)
        if group is not None:
            item.add_marker(pytest.mark.xdist_group(group))


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
    validator = None  # built on the first saved result: most tests save none (schema generation costs seconds)
    out = []
    for path, data in _saved_results(root):
        if data.get("result_format") != RESULT_FORMAT_VERSION:
            continue  # an older saved result written on purpose (upgrade tests)
        if validator is None:
            validator = jsonschema.Draft202012Validator(result_schema())
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
