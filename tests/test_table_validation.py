"""The fast schema check agrees with the reference implementation (jsonschema) on every table.

calib checks a table against its JSON Schema with ``fastjsonschema`` (compiled, about a tenth of the
cost) and asks ``jsonschema`` (the reference implementation, Draft 2020-12) for the message only when
the fast check fails. The two must agree on what is valid: checked here on the corpus tables and on
mutations of a valid one.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path

import jsonschema
import pytest

from calib.analysis import tablefile

CORPUS = Path(__file__).parent / "corpus" / "tables"


def _reference_valid(document) -> bool:
    return not list(jsonschema.Draft202012Validator(tablefile.schema()).iter_errors(document))


def _fast_valid(document) -> bool:
    import fastjsonschema

    try:
        tablefile._fast_validator(tablefile.SCHEMA_FILE)(document)
        return True
    except fastjsonschema.JsonSchemaException:
        return False


def _mutations(table: dict):
    yield "valid", table
    broken = copy.deepcopy(table)
    broken["format_version"] = "3"
    yield "version as text", broken
    broken = copy.deepcopy(table)
    broken["analyses"][0]["entries"][0]["safe_k"] = -4
    yield "negative safe k", broken
    broken = copy.deepcopy(table)
    broken["analyses"][0]["entries"][0]["grid"][0]["unexpected"] = 1
    yield "unknown grid key", broken
    broken = copy.deepcopy(table)
    del broken["notice"]
    yield "no notice", broken


@pytest.mark.parametrize("path", sorted(CORPUS.glob("*.json")), ids=lambda path: path.name)
def test_fast_and_reference_checks_agree_on_the_corpus(path):
    try:
        document = json.loads(path.read_text())
    except json.JSONDecodeError:
        pytest.skip("not JSON: refused before any schema check")
    assert _fast_valid(document) == _reference_valid(document)


def test_fast_and_reference_checks_agree_on_mutations():
    table = json.loads((CORPUS / "valid.json").read_text())
    verdicts = {name: (_fast_valid(doc), _reference_valid(doc)) for name, doc in _mutations(table)}
    assert verdicts["valid"] == (True, True)
    for name, (fast, reference) in verdicts.items():
        assert fast == reference, name
    assert sum(not fast for fast, _ in verdicts.values()) == 4  # every mutation is caught
