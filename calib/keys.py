"""Stable integer keys and per-trial random streams.

A campaign has one integer root seed. Every random draw of a trial comes from
``numpy.random.default_rng([*identity_keys, root_seed])``, where the identity keys are stable
integers derived from the trial's own parameters (never from the order in which trials are
spawned), so growing a grid, resuming a run or re-running a single trial gives the same numbers.
"""

from __future__ import annotations

import hashlib
import json
from typing import Any

import numpy as np


def canonical_json(value: Any, *, allow_nan: bool = True) -> str:
    """Serialise ``value`` with sorted keys and no whitespace: equal values give equal text.

    The one canonical JSON of the package: stable keys and identifiers hash it, stored parameters
    and solver options are written in it, and a safe-k table's checksum is the sha256 of it
    (:func:`calib.analysis.tablefile.checksum`, with ``allow_nan=False``: a table holds no NaN, and
    one that would is refused with ``ValueError``). NumPy scalars and arrays are written as the
    Python numbers and lists they hold.

    >>> canonical_json({"b": [1, 2.5], "a": np.int64(3)})
    '{"a":3,"b":[1,2.5]}'
    >>> canonical_json({"x": float("nan")}, allow_nan=False)
    Traceback (most recent call last):
    ...
    ValueError: Out of range float values are not JSON compliant
    """
    return json.dumps(value, sort_keys=True, separators=(",", ":"), allow_nan=allow_nan, default=_json_default)


def _json_default(value: Any) -> Any:
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        return float(value)
    if isinstance(value, np.ndarray):
        return value.tolist()
    raise TypeError(f"not serialisable: {type(value).__name__}")


def stable_key(value: Any) -> int:
    """A 63-bit non-negative integer that depends only on the canonical JSON of ``value``.

    >>> stable_key("gaussian") == stable_key("gaussian")
    True
    >>> stable_key({"a": 1, "b": 2}) == stable_key({"b": 2, "a": 1})
    True
    >>> 0 <= stable_key([1, 2, 3]) < 2**63
    True
    """
    digest = hashlib.blake2b(canonical_json(value).encode(), digest_size=8).digest()
    return int.from_bytes(digest, "big") >> 1


def stable_id(value: Any, length: int = 16) -> str:
    """A hexadecimal identifier of ``length`` characters for the canonical JSON of ``value``."""
    return hashlib.blake2b(canonical_json(value).encode(), digest_size=length // 2).hexdigest()


def stream(*keys: int, root_seed: int) -> np.random.Generator:
    """The random stream of one identity: ``default_rng([*keys, root_seed])``.

    >>> a = stream(7, 11, root_seed=3).standard_normal(2)
    >>> b = stream(7, 11, root_seed=3).standard_normal(2)
    >>> bool((a == b).all())
    True
    """
    return np.random.default_rng([int(key) for key in keys] + [int(root_seed)])
