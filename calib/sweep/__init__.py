"""The campaign engine (layer "engine", docs/layers.md: above the store and the verdicts, beside the analysis).

``spec`` (the TOML document; ``kgrid`` the k grid) -> ``expansion`` (the spec's trials,
:mod:`calib.trial`) -> ``runner`` (the coordinator, the only writer of :mod:`calib.store`) ->
``executors`` (in-process, local pool of ``sandbox`` worker processes, Dask) running ``tasks``;
``search`` is the sequential k search. ``estimate`` backs ``calib run --dry-run``, ``rerun`` backs
``calib rerun``, and ``plugins`` loads the modules named in ``CALIB_PLUGINS``. The schema is
documented in docs/spec.md.
"""
