"""The campaign store: what a campaign measured, in one SQLite file, and how it is resumed.

Below the success rules and both of the store's readers, the engine (:mod:`calib.sweep`, its
only writer) and the analysis (:mod:`calib.analysis`); it imports neither (docs/layers.md).

- :mod:`~calib.store.database`: :class:`~calib.store.database.Store`, opening, claiming for a
  spec, writing and reading rows;
- :mod:`~calib.store.schema`: the tables, the store formats and their migrations, column encodings;
- :mod:`~calib.store.resume`: the resume policy (resume, grow, refuse, or a new ``<name>-N`` store);
- :mod:`~calib.store.environment`: the package versions each row was produced with;
- :mod:`~calib.store.reading`: the campaign settings, the stored spec and counts read by commands;
- :mod:`~calib.store.sqlite`: read-only connections, the one-writer lock, write transactions.
"""
