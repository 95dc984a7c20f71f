"""Scalar type checks shared by every validator at the public edge.

Python's ``bool`` is a subclass of ``int`` (``True == 1``), so a bare ``isinstance(value, int)``
lets ``k = true`` in a spec, or ``n=True`` in a call, through as the number 1. Every check of a
user-given number therefore excludes ``bool`` first; this module is the one place that test is
written. NumPy scalars count as numbers (``np.int64`` is not a subclass of ``int``, nor is
``np.float32`` of ``float``), ``np.bool_`` does not (it is neither ``np.integer`` nor ``np.floating``).

The checks answer only "is this a number of that kind?": ranges and finiteness stay with the caller,
which knows the field and the fix to name in its :class:`calib.errors.InputError`. Part of the
foundation layer: imports nothing from calib.
"""

from __future__ import annotations

import numpy as np

_INTEGER_TYPES = (int, np.integer)
_REAL_TYPES = (int, float, np.integer, np.floating)


def is_integer(value: object) -> bool:
    """Whether ``value`` is an integer scalar (``int`` or a NumPy integer), ``bool`` excluded.

    >>> [is_integer(v) for v in (3, np.int64(3), True, np.bool_(True), 3.0, "3", None)]
    [True, True, False, False, False, False, False]
    """
    return isinstance(value, _INTEGER_TYPES) and not isinstance(value, bool)


def is_real(value: object) -> bool:
    """Whether ``value`` is a real scalar (``int``, ``float`` or a NumPy integer or float), ``bool``
    excluded. NaN and infinities are real here: test finiteness where it matters.

    >>> [is_real(v) for v in (3, 0.5, np.float32(0.5), np.int8(2), float("nan"), False, "0.5", 1j)]
    [True, True, True, True, True, False, False, False]
    """
    return isinstance(value, _REAL_TYPES) and not isinstance(value, bool)
