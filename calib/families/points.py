"""Point-set families for the pure JL distortion; the coordinates are projected (d -> k).

The JL count is the number of points n; the projected dimension is the ambient dimension d.

``points-gaussian``: ``clusters`` Gaussian clouds; point i belongs to cloud i mod clusters, whose
centre is drawn from N(0, separation^2 I_d); each point is its centre plus N(0, I_d) noise.

``points-subspace``: points near a ``subspace_dim``-dimensional subspace: x = U z + noise * g with
U an orthonormal d x s basis (QR of a Gaussian matrix), z ~ N(0, I_s) and g ~ N(0, I_d / d), so the
noise vector has expected squared norm noise^2.

``points-binary``: 0/1 vectors with exactly w = max(1, round(density * d)) ones each, the support
drawn uniformly; duplicate vectors are redrawn so the points are distinct (the parameters must
allow at least 2n distinct vectors: C(d, w) >= 2n).
"""

from __future__ import annotations

from math import comb

import numpy as np

from calib.families.base import Family, fraction, positive_int, register, require
from calib.problems.points import PointSet


def _build_gaussian(params: dict, rng: np.random.Generator):
    n, d = params["points"], params["dim"]
    centres = params["separation"] * rng.standard_normal((params["clusters"], d))
    labels = np.arange(n) % params["clusters"]
    points = centres[labels] + rng.standard_normal((n, d))
    return PointSet(points, name=f"points-gaussian-{n}x{d}"), {"labels": labels, "centres": centres}


def _build_subspace(params: dict, rng: np.random.Generator):
    n, d, s = params["points"], params["dim"], params["subspace_dim"]
    basis, _ = np.linalg.qr(rng.standard_normal((d, s)))
    points = rng.standard_normal((n, s)) @ basis.T + params["noise"] * rng.standard_normal((n, d)) / np.sqrt(d)
    return PointSet(points, name=f"points-subspace-{n}x{d}"), {"basis": basis}


def _binary_rows(count: int, dim: int, ones: int, rng: np.random.Generator) -> np.ndarray:
    """``count`` random 0/1 rows of length ``dim`` with ``ones`` ones each."""
    support = np.argsort(rng.random((count, dim)), axis=1)[:, :ones]
    rows = np.zeros((count, dim))
    np.put_along_axis(rows, support, 1.0, axis=1)
    return rows


def binary_weight(params: dict) -> int:
    """Ones per vector of points-binary: max(1, round(density * dim))."""
    return max(1, int(round(params["density"] * params["dim"])))


def _build_binary(params: dict, rng: np.random.Generator):
    n, d, ones = params["points"], params["dim"], binary_weight(params)
    points = _binary_rows(n, d, ones, rng)
    while True:
        _, first = np.unique(points, axis=0, return_index=True)
        repeated = np.setdiff1d(np.arange(n), first)
        if repeated.size == 0:
            break
        points[repeated] = _binary_rows(repeated.size, d, ones, rng)
    return PointSet(points, name=f"points-binary-{n}x{d}"), {"ones": ones}


def _check_sizes(params: dict) -> None:
    positive_int(params, "points", 2)
    positive_int(params, "dim")


def _check_gaussian(params: dict) -> None:
    _check_sizes(params)
    positive_int(params, "clusters")
    fraction(params, "separation", 0.0, 1e6, closed_low=True)


def _check_subspace(params: dict) -> None:
    _check_sizes(params)
    positive_int(params, "subspace_dim")
    require(params["subspace_dim"] <= params["dim"], "subspace_dim", "exceeds the ambient dimension", "set subspace_dim <= dim")
    fraction(params, "noise", 0.0, 1e6)


def _check_binary(params: dict) -> None:
    _check_sizes(params)
    fraction(params, "density")
    distinct = comb(params["dim"], binary_weight(params))
    require(distinct >= 2 * params["points"], "points", f"only {distinct} distinct vectors exist for this dim and density",
            "raise dim, move density towards 1/2, or ask for fewer points")


_SIZE_DOC = {
    "points": "number of points n (the JL n), integer >= 2",
    "dim": "ambient dimension d (the projected dimension), integer >= 1",
}


def _register(name: str, description: str, extra_defaults: dict, extra_doc: dict, build, check) -> None:
    register(Family(
        name=name, kind="points", description=description, size_keys=("points", "dim"),
        defaults={"points": None, "dim": None, **extra_defaults}, param_doc={**_SIZE_DOC, **extra_doc},
        build=build, projected_dim=lambda p: p["dim"], n_points=lambda p: p["points"], check=check,
    ))


_register("points-gaussian", "Gaussian clouds in R^d: points around cluster centres with unit-variance noise.",
          {"clusters": 1, "separation": 0.0},
          {"clusters": "number of clouds, integer >= 1",
           "separation": "standard deviation of the cloud centres per coordinate, in units of the noise, in [0, 1e6]"},
          _build_gaussian, _check_gaussian)
_register("points-subspace", "Points near a random low-dimensional subspace of R^d, with small isotropic noise.",
          {"subspace_dim": 5, "noise": 0.01},
          {"subspace_dim": "dimension s of the subspace, integer in [1, dim]",
           "noise": "root-mean-square norm of the isotropic noise added to each point, in (0, 1e6]"},
          _build_subspace, _check_subspace)
_register("points-binary", "Sparse 0/1 vectors in R^d with a fixed number of ones, all distinct.",
          {"density": 0.05},
          {"density": "fraction of ones per vector, in (0, 1]"},
          _build_binary, _check_binary)
