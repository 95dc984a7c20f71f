"""`calib families`: every registered family is listed with its kind and documented parameters."""

from __future__ import annotations

import json

from calib.cli import main
from calib.families import REGISTRY


def test_families_lists_every_registered_family(capsys):
    assert main(["families"]) == 0
    text = capsys.readouterr().out
    for name, family in REGISTRY.items():
        assert f"{name}  [{family.kind}]" in text
        for key in family.defaults:
            assert f"    {key} " in text


def test_families_name_json_shows_one_family(capsys):
    assert main(["families", "lp-basis-pursuit", "--json"]) == 0
    shown = json.loads(capsys.readouterr().out)
    assert shown["name"] == "lp-basis-pursuit" and shown["kind"] == "lp"
    params = {p["name"]: p for p in shown["parameters"]}
    assert set(params) == set(REGISTRY["lp-basis-pursuit"].defaults)
    assert params["measurements"]["required"] and params["signs"]["default"] == "signed"
    assert all(p["doc"] for p in params.values())


def test_unknown_family_is_a_one_line_error(capsys):
    # calib convention (helper rules): user errors exit with code 2 and one line on stderr
    assert main(["families", "no-such-family"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "no-such-family" in err
