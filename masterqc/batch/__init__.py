"""Release folders: discovery, parallel or distributed checking, the run ledger and the run outputs.

* :mod:`masterqc.batch.discover` -- find masters by content, safely.
* :mod:`masterqc.batch.specmap` -- one spec, or a map of globs to specs, and the spec key.
* :mod:`masterqc.batch.work` -- the picklable per-file tasks.
* :mod:`masterqc.batch.execute` -- inline, process-pool and dask backends.
* :mod:`masterqc.batch.ledger` -- the SQLite run ledger.
* :mod:`masterqc.batch.releases` -- release grouping and release-level figures.
* :mod:`masterqc.batch.outputs` -- ``summary.json``, ``junit.xml``, ``index.html``.
* :mod:`masterqc.batch.plan`, :mod:`~masterqc.batch.hashing`, :mod:`~masterqc.batch.schedule`,
  :mod:`~masterqc.batch.summarise` -- the steps of a run: plan the items, hash the files,
  put each through :func:`masterqc.pipeline.check_file` (from stored measurements or
  measured), summarise.
* :mod:`masterqc.batch.runner` -- :func:`run_batch`, one run end to end.
"""
