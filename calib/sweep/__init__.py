"""The campaign engine.

``spec`` (TOML schema and validation) -> ``trial`` (identities, streams, expansion) -> ``runner``
(the coordinator) -> ``executors`` (in-process, local pool of ``sandbox`` worker processes, Dask)
running ``tasks`` -> ``store`` (SQLite, written by the coordinator only). ``estimate`` backs
``calib run --dry-run``, ``rerun`` backs ``calib rerun``, ``export`` backs ``calib export``, and
``plugins`` loads the modules named in ``CALIB_PLUGINS``. The schema is documented in docs/spec.md.
"""
