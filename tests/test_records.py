"""The typed records of the safe-k table and the comparison mirror their JSON Schemas exactly.

The outside reference is the schema files themselves (calib/schemas/*.json, JSON Schema 2020-12):
every object kind a schema describes is one record whose fields are that object's ``properties``,
a field without default exactly where the schema lists the property as ``required``. The golden
documents of tests/golden/quickstart (written at commit cbbc6ad) read into records and back give
the same dict and the same bytes.
"""

from __future__ import annotations

import dataclasses
import json
import typing
from pathlib import Path

import pytest

from calib.analysis import records
from calib.analysis.tablefile import dumps

SCHEMAS = Path(__file__).resolve().parent.parent / "calib" / "schemas"
GOLDEN = Path(__file__).resolve().parent / "golden" / "quickstart"
DOCUMENTS = [("safe-k-table.v3.json", records.SafeKTable, "safe_k.json"),
             ("projector-comparison.v1.json", records.Comparison, "compare.json")]


def _record_types(hint) -> list[type]:
    """The record classes a field's type names (through Optional, list[...] and dict[str, ...])."""
    if isinstance(hint, type) and issubclass(hint, records.Record):
        return [hint]
    return [found for arg in typing.get_args(hint) for found in _record_types(arg)]


def _objects(node: dict, defs: dict) -> list[dict]:
    """The object schemas (with properties) a property's schema leads to, through $ref, oneOf, items, maps."""
    if "$ref" in node:
        return _objects(defs[node["$ref"].split("/")[-1]], defs)
    if "properties" in node:
        return [node]
    found = []
    for option in node.get("oneOf", []) + node.get("anyOf", []):
        found += _objects(option, defs)
    for key in ("items", "additionalProperties"):
        if isinstance(node.get(key), dict):
            found += _objects(node[key], defs)
    return found


def _check(record: type, node: dict, defs: dict, seen: set) -> None:
    seen.add(record)
    fields = {records.json_name(field.name): field for field in dataclasses.fields(record)}
    assert set(fields) == set(node["properties"]), record.__name__
    required = {name for name, field in fields.items() if field.default is dataclasses.MISSING}
    assert required == set(node.get("required", [])), record.__name__
    assert node.get("additionalProperties") is False, record.__name__  # so the fields are the whole object
    hints = typing.get_type_hints(record, vars(records))
    for name, field in fields.items():
        inner, objects = _record_types(hints[field.name]), _objects(node["properties"][name], defs)
        assert len(inner) == len(objects), f"{record.__name__}.{name}"
        for sub, obj in zip(inner, objects):
            _check(sub, obj, defs, seen)


@pytest.mark.parametrize("schema_file, root, _", DOCUMENTS)
def test_record_fields_are_the_schema_properties(schema_file, root, _):
    schema = json.loads((SCHEMAS / schema_file).read_text(encoding="utf-8"))
    seen: set = set()
    _check(root, schema, schema.get("$defs", {}), seen)
    prefix = "Cmp" if root is records.Comparison else ""
    module = {cls for cls in vars(records).values() if isinstance(cls, type) and issubclass(cls, records.Record)
              and cls is not records.Record and (cls.__name__.startswith("Cmp") or cls is records.Comparison) == bool(prefix)}
    assert seen == module  # every record of the module is one object kind of its schema


@pytest.mark.parametrize("_, root, golden", DOCUMENTS)
def test_a_document_read_into_records_writes_the_same_bytes(_, root, golden):
    text = (GOLDEN / golden).read_text(encoding="utf-8")
    document = json.loads(text)
    typed = root.from_dict(document)
    assert typed.to_dict() == document and dumps(typed.to_dict()) == text


def test_a_field_the_schema_does_not_name_is_refused():
    entry = json.loads((GOLDEN / "safe_k.json").read_text(encoding="utf-8"))["analyses"][0]["entries"][0]
    assert records.Entry.from_dict(entry).class_.safe_k == entry["class"]["safe_k"]
    with pytest.raises(ValueError, match="safe_K"):
        records.Entry.from_dict({**entry, "safe_K": 3})
