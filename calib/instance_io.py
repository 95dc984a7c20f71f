"""Saving instances to a folder and loading them back, bit for bit.

Folder layout (default folder ``instances/``; STEM defaults to ``FAMILY-INDEX-ID``)::

    STEM.json        manifest (below)
    STEM.mps         an LP in free MPS (kind "lp")
    STEM.npz         any other kind, in the arrays layout (below), through its registered codec
    STEM.info.npz    the array entries of ``instance.info`` (planted points, certificates), if any

Manifest, one JSON object: ``format`` ("calib-instance/1"), ``family``, ``kind``, ``params``,
``seed`` (the integer or list of integers the instance's random stream came from), ``index``,
``name`` (the problem's name), ``data`` (problem file name), ``sha256`` (hex digest of its bytes),
``codec`` (small facts the codec keeps, e.g. whether an LP matrix was dense), ``info`` (the
JSON-able entries of ``instance.info``), and ``info_data`` / ``info_sha256`` when arrays exist.
Loading checks both digests, so an edited file is refused rather than silently used.

MPS: the free-MPS text of :func:`calib.problems.mps.mps_text` (its module docstring states the
format and HiGHS's limits on it), read back by :func:`calib.problems.mps.read_mps_standard` with the
decision a campaign gives the file.

Arrays layout (``.npz``, readable with ``numpy.load(path, allow_pickle=False)``; no pickles):

- a dense array NAME is the member ``NAME.npy``;
- a sparse matrix NAME (stored as CSR) is the members ``NAME.data``, ``NAME.indices``,
  ``NAME.indptr`` and ``NAME.shape`` (int64, length 2);
- the member ``__meta__`` is a 0-d unicode array holding JSON
  ``{"layout": "calib-arrays/1", "sparse": [names of sparse matrices], "meta": {free JSON}}``;
- array names match ``[A-Za-z0-9_-]+``; members are written in sorted order with a fixed
  timestamp, so equal content gives equal bytes.

Other problem kinds plug in with :func:`register_codec` and :func:`arrays_codec`, giving two
functions ``problem -> (arrays, meta)`` and ``(arrays, meta) -> problem``.
"""

from __future__ import annotations

import hashlib
import io
import json
import re
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Union

import numpy as np
import scipy.sparse as sp

from calib.errors import InputError
from calib.families.base import Instance
from calib.keys import stable_id
from calib.problems.arrays import INF_BOUND
from calib.problems.lp import StandardLP
from calib.problems.mps import mps_text, read_mps_standard

LAYOUT = "calib-arrays/1"
MANIFEST_FORMAT = "calib-instance/1"
DEFAULT_FOLDER = Path("instances")
_ARRAY_NAME = re.compile(r"[A-Za-z0-9_-]+")
_FIXED_TIME = (1980, 1, 1, 0, 0, 0)
PathLike = Union[str, Path]


def sha256_hex(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


# --- arrays layout ---------------------------------------------------------------------------

def _npy_bytes(array: np.ndarray) -> bytes:
    buffer = io.BytesIO()
    np.lib.format.write_array(buffer, array, allow_pickle=False)
    return buffer.getvalue()


def arrays_bytes(arrays: dict, meta: Any = None) -> bytes:
    """The npz bytes of ``arrays`` (name -> ndarray or scipy.sparse matrix) with JSON ``meta``."""
    members, sparse_names = {}, []
    for name, value in arrays.items():
        if not _ARRAY_NAME.fullmatch(name):
            raise ValueError(f"array name {name!r} must match {_ARRAY_NAME.pattern}")
        if sp.issparse(value):
            csr = sp.csr_array(value)
            csr.sum_duplicates()
            members.update({f"{name}.data": csr.data, f"{name}.indices": csr.indices.astype(np.int64),
                            f"{name}.indptr": csr.indptr.astype(np.int64), f"{name}.shape": np.array(csr.shape, dtype=np.int64)})
            sparse_names.append(name)
        else:
            value = np.asarray(value)
            if value.dtype.hasobject:
                raise TypeError(f"array {name!r} holds Python objects; the arrays layout stores numbers only")
            members[name] = value
    header = {"layout": LAYOUT, "sparse": sorted(sparse_names), "meta": meta if meta is not None else {}}
    members["__meta__"] = np.array(json.dumps(header, sort_keys=True, allow_nan=False))
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_DEFLATED) as archive:
        for key in sorted(members):
            archive.writestr(zipfile.ZipInfo(key + ".npy", date_time=_FIXED_TIME), _npy_bytes(members[key]),
                             compress_type=zipfile.ZIP_DEFLATED)
    return buffer.getvalue()


def save_arrays(path: PathLike, arrays: dict, meta: Any = None) -> str:
    """Write the arrays layout to ``path``; returns the sha256 of the bytes written."""
    data = arrays_bytes(arrays, meta)
    Path(path).write_bytes(data)
    return sha256_hex(data)


_RESAVE = "re-save it with calib.instance_io.save_arrays"


def load_arrays(path: PathLike) -> tuple:
    """(arrays, meta) from a file in the arrays layout; InputError naming the file when it is not one.

    Sparse matrices come back as CSR arrays, their index structure checked. Floating arrays
    holding NaN or infinite entries are refused (an infinite bound is stored as a magnitude of
    at least :data:`calib.problems.arrays.INF_BOUND`, as everywhere in calib). Object arrays are never
    unpickled.
    """
    path = Path(path)
    try:
        with np.load(path, allow_pickle=False) as archive:
            if not hasattr(archive, "files"):
                raise ValueError("a single .npy array, not an .npz archive")
            members = {key: archive[key] for key in archive.files}
        header = json.loads(str(members.pop("__meta__").item()))
    except (OSError, ValueError, KeyError, EOFError, zipfile.BadZipFile) as error:
        raise InputError(str(path), f"not a readable calib arrays file ({type(error).__name__}: {error})", _RESAVE) from None
    if not isinstance(header, dict) or header.get("layout") != LAYOUT:
        raise InputError(str(path), f"unknown layout {header.get('layout') if isinstance(header, dict) else header!r}",
                         f"expected {LAYOUT}")
    if not isinstance(header.get("sparse"), list) or "meta" not in header:
        raise InputError(str(path), "the __meta__ header lacks its 'sparse' list or its 'meta' entry", _RESAVE)
    arrays = {name: _sparse_member(path, members, name) for name in header["sparse"]}
    arrays.update(members)
    for name, value in arrays.items():
        _check_finite_array(path, name, value.data if sp.issparse(value) else value)
    return arrays, header["meta"]


def _sparse_member(path: Path, members: dict, name) -> sp.csr_array:
    """The CSR matrix ``name`` from its four members, its structure checked (InputError otherwise)."""
    try:
        data, indices, indptr, shape = (members.pop(f"{name}.{part}") for part in ("data", "indices", "indptr", "shape"))
        if shape.shape != (2,) or not np.issubdtype(shape.dtype, np.integer) or shape.min() < 0:
            raise ValueError(f"shape member is {shape.tolist()!r}, expected two non-negative integers")
        matrix = sp.csr_array((data, indices, indptr), shape=tuple(int(s) for s in shape))
        matrix.check_format(full_check=True)
    except (KeyError, ValueError, TypeError) as error:
        raise InputError(str(path), f"sparse matrix {name!r} is inconsistent ({type(error).__name__}: {error})", _RESAVE) from None
    return matrix


def _check_finite_array(path: Path, name: str, data: np.ndarray) -> None:
    if np.issubdtype(data.dtype, np.inexact) and not np.isfinite(data).all():
        what = "NaN" if np.isnan(data).any() else "infinite entries"
        raise InputError(str(path), f"array {name!r} contains {what}",
                         f"regenerate or repair the instance (store an infinite bound as +-{INF_BOUND:g})")


# --- codecs: one per problem kind ------------------------------------------------------------

@dataclass(frozen=True)
class Codec:
    """How one problem kind goes to a file and back.

    ``encode(problem) -> (bytes, facts)`` and ``decode(path, facts) -> problem``; ``facts`` is a
    small JSON-able dict kept in the manifest.
    """

    suffix: str
    encode: Callable[[Any], tuple]
    decode: Callable[[Path, dict], Any]


CODECS: dict = {}


def register_codec(kind: str, codec: Codec) -> Codec:
    if kind in CODECS:
        raise ValueError(f"codec for kind {kind!r} registered twice")
    CODECS[kind] = codec
    return codec


def arrays_codec(to_arrays: Callable[[Any], tuple], from_arrays: Callable[[dict, Any], Any]) -> Codec:
    """A ``.npz`` codec from ``problem -> (arrays, meta)`` and ``(arrays, meta) -> problem``."""
    return Codec(suffix=".npz",
                 encode=lambda problem: (arrays_bytes(*to_arrays(problem)), {}),
                 decode=lambda path, facts: from_arrays(*load_arrays(path)))


def _decode_lp(path: Path, facts: dict) -> StandardLP:
    lp = read_mps_standard(path)
    if facts.get("dense"):
        lp.A = lp.A.toarray()
    return lp


register_codec("lp", Codec(suffix=".mps", encode=lambda lp: (mps_text(lp).encode(), {"dense": not sp.issparse(lp.A)}),
                           decode=_decode_lp))


def _codec(kind: str, where: str) -> Codec:
    if kind not in CODECS:
        raise InputError(where, f"no file format for problem kind {kind!r}", f"known kinds: {', '.join(sorted(CODECS))}")
    return CODECS[kind]


def problem_bytes(kind: str, problem: Any) -> bytes:
    """The exact bytes a problem is saved as (equal instances give equal bytes)."""
    return _codec(kind, "kind").encode(problem)[0]


def instance_digest(instance: Instance) -> str:
    """sha256 of :func:`problem_bytes` of the instance's problem."""
    return sha256_hex(problem_bytes(instance.kind, instance.problem))


# --- save / load -----------------------------------------------------------------------------

def _json_value(value: Any) -> Any:
    return value.item() if isinstance(value, np.generic) else value


def _split_info(info: dict) -> tuple:
    """(arrays, JSON entries) of an info dict."""
    arrays = {key: value for key, value in info.items() if isinstance(value, np.ndarray) or sp.issparse(value)}
    scalars = {key: _json_value(value) for key, value in info.items() if key not in arrays}
    return arrays, scalars


def _write(path: Path, data: bytes) -> str:
    path.write_bytes(data)
    return sha256_hex(data)


def save_instance(instance: Instance, seed, folder: PathLike = DEFAULT_FOLDER, stem: str = "") -> Path:
    """Save ``instance`` (made from random stream ``seed``) under ``folder``; returns the manifest path.

    ``seed`` is an integer or list of integers. An existing STEM is overwritten.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    codec = _codec(instance.kind, "kind")
    stem = stem or f"{instance.family}-{instance.index}-{stable_id([instance.params, seed, instance.index], 12)}"
    data, facts = codec.encode(instance.problem)
    data_path = folder / (stem + codec.suffix)
    info_arrays, info_json = _split_info(instance.info)
    manifest = {
        "format": MANIFEST_FORMAT, "family": instance.family, "kind": instance.kind,
        "params": instance.params, "seed": seed, "index": instance.index,
        "name": getattr(instance.problem, "name", stem), "data": data_path.name,
        "sha256": _write(data_path, data), "codec": facts, "info": info_json,
    }
    if info_arrays:
        info_path = folder / (stem + ".info.npz")
        manifest["info_data"] = info_path.name
        manifest["info_sha256"] = _write(info_path, arrays_bytes(info_arrays))
    manifest_path = folder / (stem + ".json")
    manifest_path.write_text(json.dumps(manifest, indent=2, sort_keys=True, allow_nan=False) + "\n")
    return manifest_path


def _verified(folder: Path, file_name: str, digest: str) -> Path:
    path = folder / file_name
    if not path.is_file():
        raise InputError(str(path), "missing (named by its manifest)", "restore the file or remove the manifest")
    if sha256_hex(path.read_bytes()) != digest:
        raise InputError(str(path), "checksum differs from its manifest (the file changed after saving)",
                         "restore the saved file or save the instance again")
    return path


def read_manifest(path: PathLike) -> dict:
    """The manifest at ``path``, checked for its format and required keys."""
    path = Path(path)
    try:
        manifest = json.loads(path.read_text())
    except (OSError, ValueError) as error:
        raise InputError(str(path), f"not a readable JSON manifest ({error})", "point to a STEM.json written by save_instance") from None
    required = ("format", "family", "kind", "params", "seed", "index", "name", "data", "sha256", "codec", "info")
    missing = [key for key in required if not isinstance(manifest, dict) or key not in manifest]
    if missing or manifest["format"] != MANIFEST_FORMAT:
        raise InputError(str(path), f"not a {MANIFEST_FORMAT} manifest" + (f" (missing {missing[0]!r})" if missing else ""),
                         "point to a STEM.json written by save_instance")
    for key, kinds in _MANIFEST_TYPES.items():
        value = manifest.get(key)
        if key in manifest and (not isinstance(value, kinds) or isinstance(value, bool)):
            raise InputError(f"{path}: {key}", f"has the wrong type ({type(value).__name__})", "save the instance again")
    if manifest["index"] < 0:
        raise InputError(f"{path}: index", f"must be >= 0, got {manifest['index']}", "save the instance again")
    for key in ("data", "info_data"):
        if key in manifest and not _plain_name(manifest[key]):
            raise InputError(f"{path}: {key}", f"{manifest[key]!r} is not a file name in the manifest's own folder",
                             "a manifest names only files beside it; save the instance again")
    return manifest


#: manifest key -> the JSON types it may hold
_MANIFEST_TYPES = {"family": str, "kind": str, "params": dict, "index": int, "name": str, "data": str, "sha256": str,
                   "codec": dict, "info": dict, "info_data": str, "info_sha256": str}


def _plain_name(name: str) -> bool:
    """A bare file name: no folder part, not "." or ".." (manifests never point outside their folder).

    >>> _plain_name("a.mps"), _plain_name("../a.mps"), _plain_name("/tmp/a.mps"), _plain_name("..")
    (True, False, False, False)
    """
    return bool(name) and name not in (".", "..") and "/" not in name and "\\" not in name and "\0" not in name


def load_instance(path: PathLike) -> tuple:
    """(Instance, manifest) from a manifest written by :func:`save_instance`; digests are checked."""
    path = Path(path)
    manifest = read_manifest(path)
    codec = _codec(manifest["kind"], str(path))
    problem = codec.decode(_verified(path.parent, manifest["data"], manifest["sha256"]), manifest["codec"])
    if hasattr(problem, "name"):
        problem.name = manifest["name"]
    info = dict(manifest["info"])
    if "info_data" in manifest:
        info.update(load_arrays(_verified(path.parent, manifest["info_data"], manifest["info_sha256"]))[0])
    instance = Instance(family=manifest["family"], params=manifest["params"], index=manifest["index"],
                        kind=manifest["kind"], problem=problem, info=info)
    return instance, manifest


def saved_manifests(folder: PathLike = DEFAULT_FOLDER) -> list:
    """Manifest paths in ``folder`` (sorted), for loading a saved set one by one."""
    folder = Path(folder)
    if not folder.is_dir():
        raise InputError(str(folder), "no such folder", "give the folder the instances were saved to")
    return sorted(folder.glob("*.json"))
