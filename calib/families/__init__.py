"""Instance families. Importing this package registers every built-in family."""

from calib.families import lp_random  # noqa: F401  (registers lp-planted, lp-farkas)
from calib.families import points, qp, sdp  # noqa: F401  (registers the point-set, QP and SDP families)
from calib.families.base import REGISTRY, Family, Instance, get, register

__all__ = ["REGISTRY", "Family", "Instance", "get", "register"]
