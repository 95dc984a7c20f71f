"""The problem kinds by name, and how each counts n (the JL points) and m (the projected dimension).

A family, a stored trial and a table name a problem kind by a short string (``lp``, ``sdp``, ``qp``,
``points``, ``clustering``, ``milp``); :func:`containers` maps it to its container class. Each container
states its own count: ``jl_points`` on a built problem, ``jl_points_for(size)`` from a family's sizes
before building, and ``COUNTING``, the one text ``calib families``, ``calib probe`` and the docs
show (:func:`counting`).

The containers are imported on first use, not with this module: ``calib --help`` and ``calib
bounds`` reach :func:`counting` through the command modules and must not pay for scipy.sparse
(the containers' import) at start-up.
"""

from __future__ import annotations


def containers() -> dict[str, type]:
    """Problem kind -> its container class.

    >>> sorted(containers())
    ['clustering', 'lp', 'milp', 'points', 'qp', 'sdp']
    """
    # here, not at import: the module docstring's start-up reason
    from calib.problems.clustering import ClusteringProblem
    from calib.problems.lp import StandardLP
    from calib.problems.milp import StandardMILP
    from calib.problems.points import PointSet
    from calib.problems.qp import QP
    from calib.problems.sdp import StandardSDP

    return {"lp": StandardLP, "sdp": StandardSDP, "qp": QP, "points": PointSet, "clustering": ClusteringProblem,
            "milp": StandardMILP}


def counting(kind: str) -> str:
    """How ``kind`` counts n and m: its container's ``COUNTING`` text (KeyError for an unknown kind:
    kinds come from the family registry, not from users).

    >>> counting("points")
    'n = the number of points; m = their dimension, reduced to k'
    """
    return containers()[kind].COUNTING
