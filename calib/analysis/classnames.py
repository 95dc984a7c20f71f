"""A class named by the parameters that differ between the classes of one table (standard library only).

A table's entries each carry ``class_params`` (the family's non-size parameters, dict of scalars).
Naming every class by all of them buries the one that matters, so :func:`class_namer` keeps only the
keys whose values differ between the classes, in sorted order: ``rank=12`` beside ``without rank``.
Costs: O(items x keys) once, then O(keys) per name. The tables, the plots, the comparison, the
predictor and the lookup all name classes through it.
"""

from __future__ import annotations

import json


def class_namer(classes: list[dict]):
    """class_params -> short text naming only the parameters that differ between ``classes`` (the
    class_params of the items named, one dict each).

    A parameter left at None (its family's default, e.g. no low rank) reads "without KEY"; text values
    read without quotes.

    >>> name = class_namer([{"rank": 12, "cost": "c"}, {"rank": None, "cost": "c"}])
    >>> name({"rank": 12, "cost": "c"}), name({"rank": None, "cost": "c"})
    ('rank=12', 'without rank')
    """
    keys = sorted({key for params in classes for key in params})
    varying = [key for key in keys if len({json.dumps(params.get(key)) for params in classes}) > 1]

    def text(key: str, value) -> str:
        if value is None:
            return f"without {key}"
        return f"{key}={value}" if isinstance(value, str) else f"{key}={json.dumps(value)}"

    return lambda params: " ".join(text(key, params.get(key)) for key in varying)
