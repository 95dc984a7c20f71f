"""Real LPs read from MPS files: the vendored Netlib subset and a folder of the user's own files.

Both families read the file with :func:`calib.problems.mps.read_mps` and convert it with
:meth:`GeneralLP.to_standard`, so their size is fixed by the file; the rows of that standard form
(equalities, then rows with a lower bound, rows with an upper bound, then finite column upper
bounds, each inequality with its slack) are the rows projections act on. The random stream is not
used: every instance index gives the same problem.

- ``netlib``: parameter ``name`` picks one problem of ``calib/data/netlib`` (feasible ones carry
  their published optimum, from ``optima.csv``, in ``info["optimal_value"]``; the ones from the
  infeasible collection carry ``info["feasible"] = False``).
- ``mps-dir``: parameters ``dir`` and ``name`` pick ``DIR/NAME`` (``.mps`` or ``.mps.gz`` may be
  left out). Read errors are :class:`InputError` naming the file. ``dir`` alone (no ``name``) stands
  for every MPS file of the folder, one size each; ``dir`` is a class parameter and ``name`` the
  size key, so the folder is one class whose files are its instances (of different sizes: a class
  claim is made for a policy rule such as k = f m, see :mod:`calib.analysis.classrule`).

Decision columns: the columns that occur in two rows or more of the standard form (a column in a
single row, a slack or surplus, is completed exactly from the others: :mod:`calib.reduce.completion`),
or, with ``decision_prefix``, the columns whose MPS names start with that text.

Both families are ``fixed``: every instance index of a file is the same problem, so the file, not
the instance index, is the unit of a class claim.
"""

from __future__ import annotations

import csv
import functools
from pathlib import Path

import numpy as np

from calib.errors import InputError
from calib.families.base import Family, register, require
from calib.problems.lp import StandardLP
from calib.problems.mps import read_mps, read_mps_standard

NETLIB_DIR = Path(__file__).resolve().parent.parent / "data" / "netlib"
MPS_SUFFIXES = (".mps", ".mps.gz", ".MPS", ".MPS.gz")


def netlib_files() -> dict:
    """Problem name -> (path, feasible) for every vendored Netlib file."""
    files = {}
    for folder, feasible in (("feasible", True), ("infeasible", False)):
        for path in sorted((NETLIB_DIR / folder).glob("*.mps")):
            files[path.stem] = (path, feasible)
    return files


def netlib_optima() -> dict:
    """Problem name -> published optimal objective value (Netlib ``lp/data`` summary table)."""
    with open(NETLIB_DIR / "optima.csv", newline="") as handle:
        return {row["name"]: float(row["optimal_value"]) for row in csv.DictReader(handle)}


@functools.lru_cache(maxsize=64)
def _standard_shape(path: str, stamp: tuple) -> tuple:
    lp = read_mps_standard(path)
    return lp.n_rows, lp.n_cols


def _shape(path: Path) -> tuple:
    """(rows, cols) of the file's standard form; cached while the file is unchanged."""
    status = path.stat()
    return _standard_shape(str(path), (status.st_mtime_ns, status.st_size))


def _read_standard(path: Path, name: str, prefix=None):
    """The file's standard form named ``name`` (:func:`calib.problems.mps.read_mps_standard`)."""
    lp = read_mps_standard(path, prefix)
    lp.name = name
    return lp


@functools.lru_cache(maxsize=64)
def _prefix_matches(path: str, stamp: tuple, prefix: str) -> int:
    return int(read_mps(path).structural_decision(prefix).size)


def _check_prefix(params: dict, path: Path) -> None:
    """``decision_prefix``: None, or a text that starts the name of at least one column of the file."""
    prefix = params["decision_prefix"]
    if prefix is None:
        return
    require(isinstance(prefix, str) and prefix != "", "decision_prefix", "must be a nonempty text",
            "give the start of your decision columns' names, or drop it to derive them from the structure")
    status = path.stat()
    require(_prefix_matches(str(path), (status.st_mtime_ns, status.st_size), prefix) > 0, "decision_prefix",
            f"no column of {path.name} has a name starting with {prefix!r}", "check the column names in the COLUMNS section")


_PREFIX_DOC = ("the decision columns are those whose MPS name starts with this text (the others are completed "
               "exactly from them); default: every column in two rows or more of the standard form")

# --- netlib ----------------------------------------------------------------------------------

def _netlib_path(params: dict) -> Path:
    return netlib_files()[params["name"]][0]


def _build_netlib(params: dict, rng: np.random.Generator):
    name = params["name"]
    path, feasible = netlib_files()[name]
    info = {"feasible": feasible, "source": "netlib"}
    if feasible:
        info["optimal_value"] = netlib_optima()[name]
    return _read_standard(path, f"netlib-{name}", params["decision_prefix"]), info


def _check_netlib(params: dict) -> None:
    names = netlib_files()
    require(params["name"] in names, "name", f"no vendored Netlib problem {params['name']!r}",
            f"choose one of {', '.join(names)}")
    _check_prefix(params, names[params["name"]][0])


register(Family(
    name="netlib",
    kind="lp",
    description="A real LP from the vendored Netlib subset (15 feasible problems with published optima, "
                "5 infeasible ones), in standard form; size fixed by the problem. All standard-form "
                "rows are projected.",
    size_keys=("name",),
    defaults={"name": None, "decision_prefix": None},
    param_doc={"name": "problem name, one of: " + ", ".join(netlib_files()),
               "decision_prefix": _PREFIX_DOC},
    build=_build_netlib,
    projected_dim=lambda p: _shape(_netlib_path(p))[0],
    n_points=lambda p: StandardLP.jl_points_for(_shape(_netlib_path(p))[1]),
    check=_check_netlib,
    fixed=True,
))


# --- the user's folder -----------------------------------------------------------------------

def _user_path(params: dict) -> Path:
    """DIR/NAME, trying the MPS suffixes when NAME has none; InputError when nothing matches."""
    folder = Path(params["dir"])
    found = mps_names(folder)
    candidates = [folder / params["name"]] + [folder / (params["name"] + suffix) for suffix in MPS_SUFFIXES]
    for path in candidates:
        if path.is_file():
            return path
    raise InputError(str(folder / params["name"]), "no such MPS file",
                     f"files in that folder: {', '.join(found) or 'none'}")


def _build_user(params: dict, rng: np.random.Generator):
    path = _user_path(params)
    return _read_standard(path, path.name, params["decision_prefix"]), {"source": str(path)}


def _folder_sizes(params: dict) -> list:
    """A folder alone stands for every MPS file in it (one size each); a named file for itself."""
    if params.get("name") not in (None, ""):
        return [params]
    require(isinstance(params.get("dir"), str) and params.get("dir") != "", "dir", "must be a nonempty text",
            "set dir to the folder of your MPS files")
    names = mps_names(params["dir"])
    if not names:
        raise InputError(str(params["dir"]), "holds no MPS file (.mps, .mps.gz)", "put your models there or fix dir")
    return [{**params, "name": name} for name in names]


def _check_user(params: dict) -> None:
    for key in ("dir", "name"):
        require(isinstance(params[key], str) and params[key] != "", key, "must be a nonempty text", f"set {key}")
    _shape(_user_path(params))  # reads the file once: a malformed file fails here, naming itself
    _check_prefix(params, _user_path(params))


register(Family(
    name="mps-dir",
    kind="lp",
    description="An LP of the user's own: the MPS file NAME in folder DIR, in standard form; size "
                "fixed by the file. DIR alone makes every MPS file of the folder an instance of one class. "
                "All standard-form rows are projected.",
    size_keys=("name",),
    defaults={"dir": None, "name": None, "decision_prefix": None},
    param_doc={"dir": "folder holding the MPS files (the class)",
               "name": "file name in that folder (.mps / .mps.gz may be left out); omit it for every file",
               "decision_prefix": _PREFIX_DOC},
    build=_build_user,
    projected_dim=lambda p: _shape(_user_path(p))[0],
    n_points=lambda p: StandardLP.jl_points_for(_shape(_user_path(p))[1]),
    check=_check_user,
    expand=_folder_sizes,
    fixed=True,
))


def mps_names(folder) -> list:
    """Names of the MPS files in ``folder`` (for iterating the ``mps-dir`` family over a folder)."""
    folder = Path(folder)
    if not folder.is_dir():
        raise InputError(str(folder), "no such folder", "give the folder holding your MPS files")
    return sorted(p.name for p in folder.iterdir() if p.is_file() and p.name.endswith(MPS_SUFFIXES))
