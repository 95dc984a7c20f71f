"""Instance families. Importing this package registers every built-in family."""

from calib.families import lp_random  # noqa: F401  (registers lp-planted, lp-farkas)
from calib.families import lp_covering, lp_quantile, lp_real, lp_sparse, lp_transport  # noqa: F401  (structured and real LPs)
from calib.families import points, qp, sdp  # noqa: F401  (registers the point-set, QP and SDP families)
from calib.families import clustering  # noqa: F401  (registers cluster-mixture, cluster-digits)
from calib.families import milp  # noqa: F401  (registers milp-knapsack, milp-cover)
from calib.families.base import REGISTRY, Family, Instance, get, register

__all__ = ["REGISTRY", "Family", "Instance", "get", "register"]
