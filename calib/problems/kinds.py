"""The problem kinds by name, and how each counts n (the JL points) and m (the projected dimension).

A family, a stored trial and a table name a problem kind by a short string (``lp``, ``sdp``, ``qp``,
``points``, ``clustering``, ``milp``); :func:`container` gives its container class. Each container
states its own count: ``jl_points`` on a built problem, ``jl_points_for(size)`` from a family's sizes
before building, and ``COUNTING``, the one text ``calib families``, ``calib probe`` and the docs
show (:func:`counting`).

The containers are imported on first use, not with this module: ``calib --help`` and ``calib
bounds`` reach :func:`counting` through the command modules and must not pay for scipy.sparse
(the containers' import) at start-up.
"""

from __future__ import annotations

import importlib

#: problem kind -> (module, class) of its container
CONTAINERS: dict[str, tuple[str, str]] = {
    "lp": ("calib.problems.lp", "StandardLP"), "sdp": ("calib.problems.sdp", "StandardSDP"),
    "qp": ("calib.problems.qp", "QP"), "points": ("calib.problems.points", "PointSet"),
    "clustering": ("calib.problems.clustering", "ClusteringProblem"), "milp": ("calib.problems.milp", "StandardMILP"),
}


def container(kind: str) -> type:
    """The container class of ``kind`` (KeyError for an unknown kind: kinds come from the registry, not users).

    >>> container("qp").__name__
    'QP'
    """
    module, name = CONTAINERS[kind]
    return getattr(importlib.import_module(module), name)


def counting(kind: str) -> str:
    """How ``kind`` counts n and m: its container's ``COUNTING`` text.

    >>> counting("points")
    'n = the number of points; m = their dimension, reduced to k'
    """
    return container(kind).COUNTING
