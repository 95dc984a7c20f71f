"""Provenance: the package versions of the process that produced a stored row.

Every trial row and instance row names the environment it was computed in (``env_id``, the stable id
of the versions, :func:`calib.keys.stable_id`); the ``environments`` table maps each id to its
versions: calib, the trial-identity :data:`calib.SCHEMA_VERSION`, Python, numpy, scipy, SCS and
HiGHS. A worker reports its own (:func:`environment`, once per process), so a campaign run across
machines records each one's. Costs: O(1) (the solver modules are imported, once).
"""

from __future__ import annotations

import sys

import numpy as np

from calib import SCHEMA_VERSION, __version__


def environment() -> dict:
    """Versions of calib, Python and the numerical packages in this process."""
    import highspy
    import scipy
    import scs

    versions = {"calib": __version__, "schema": SCHEMA_VERSION, "python": sys.version.split()[0],
                "numpy": np.__version__, "scipy": scipy.__version__, "scs": scs.__version__}
    try:
        from importlib.metadata import version

        versions["highspy"] = version("highspy")
    except Exception:  # pragma: no cover - metadata missing in odd installs
        versions["highspy"] = getattr(highspy, "__version__", "unknown")
    return versions
