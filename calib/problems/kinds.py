"""The problem kinds by name, and how each counts n (the JL points) and m (the projected dimension).

A family, a stored trial and a table name a problem kind by a short string (``lp``, ``sdp``, ``qp``,
``points``, ``clustering``, ``milp``); :data:`CONTAINERS` maps it to its container class. Each
container states its own count: ``jl_points`` on a built problem, ``jl_points_for(size)`` from a
family's sizes before building, and ``COUNTING``, the one text ``calib families``, ``calib probe``
and the docs show (:func:`counting`).
"""

from __future__ import annotations

from calib.problems.clustering import ClusteringProblem
from calib.problems.lp import StandardLP
from calib.problems.milp import StandardMILP
from calib.problems.points import PointSet
from calib.problems.qp import QP
from calib.problems.sdp import StandardSDP

#: problem kind -> its container class
CONTAINERS: dict[str, type] = {"lp": StandardLP, "sdp": StandardSDP, "qp": QP, "points": PointSet,
                               "clustering": ClusteringProblem, "milp": StandardMILP}

#: problem kind -> how it counts n and m (each container's ``COUNTING``)
COUNTING: dict[str, str] = {kind: container.COUNTING for kind, container in CONTAINERS.items()}


def counting(kind: str) -> str:
    """How ``kind`` counts n and m (:data:`COUNTING`).

    >>> counting("points")
    'n = the number of points; m = their dimension, reduced to k'
    """
    return COUNTING[kind]
