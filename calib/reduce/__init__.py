"""Reductions by problem kind.

A handler (one per kind) knows how to solve an original problem, project it with a drawn
projector, solve the projected problem and retrieve original-space points, producing one
:mod:`calib.metrics` record per retrieval method. The runner only talks to :data:`HANDLERS`.
"""

from calib.reduce.lp import LPHandler

#: problem kind -> handler
HANDLERS = {
    LPHandler.kind: LPHandler,
}
