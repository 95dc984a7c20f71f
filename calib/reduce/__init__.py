"""Reductions by problem kind.

A handler (one per kind) knows how to solve an original problem, project it with a drawn
projector, solve the projected problem and retrieve original-space points, producing one
:mod:`calib.metrics` record per retrieval method (see :mod:`calib.reduce.base`). The runner only
talks to :data:`HANDLERS`.

Retrievals by kind (default first):

- lp: basis-lstsq, alternating, restricted-repair, warm-start (:mod:`calib.reduce.lp`)
- sdp: affine-psd, affine, alternating (:mod:`calib.reduce.sdp`)
- qp: lift (:mod:`calib.reduce.qp`)
- points: none (:mod:`calib.reduce.points`)
- clustering: partition (:mod:`calib.reduce.clustering`)
- milp: completion (:mod:`calib.reduce.milp`)

When a spec asks for retrievals a kind does not have, that kind runs the ones it has among them,
or its default when it has none of them (:meth:`calib.reduce.base.Handler.retrieval_names`).
"""

from calib.reduce.clustering import ClusteringHandler
from calib.reduce.lp import LPHandler
from calib.reduce.milp import MILPHandler
from calib.reduce.points import PointsHandler
from calib.reduce.qp import QPHandler
from calib.reduce.sdp import SDPHandler

#: problem kind -> handler
HANDLERS = {handler.kind: handler for handler in (LPHandler, SDPHandler, QPHandler, PointsHandler,
                                                    ClusteringHandler, MILPHandler)}


def retrieval_names(kind: str, requested: list[str] | None) -> list[str]:
    """The retrievals a trial of ``kind`` runs for the names ``requested`` (rule in the module docstring).

    >>> retrieval_names("lp", ["affine-psd", "warm-start", "basis-lstsq"])
    ['warm-start', 'basis-lstsq']
    >>> retrieval_names("sdp", ["basis-lstsq"])
    ['affine-psd']
    """
    return HANDLERS[kind].retrieval_names(requested)
