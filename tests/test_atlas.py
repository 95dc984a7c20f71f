"""The atlas: its campaign specs, the Python answer for other tools, and the shipped tables.

The answers are checked against ``calib lookup`` (the command other users run) on a small table
made here from the shared analysis campaign; the shipped atlas files against the JSON Schema
2020-12 validator of the jsonschema package and an independent sha256 of their canonical JSON.
"""

from __future__ import annotations

import hashlib
import json
import math
from pathlib import Path

import jsonschema
import pytest

from analysis_campaign import run_campaign_in
from calib import atlas
from calib.analysis.tablefile import schema
from calib.analysis.tables import build_table, write_table
from calib.cli import main
from calib.errors import InputError
from calib.families import get
from calib.store.database import Store
from calib.sweep.spec import load_spec
from calib.verdicts.saferule import Confidence
from calib.verdicts.success import make_predicate

ROOT = Path(__file__).resolve().parent.parent
SPECS = (ROOT / "instances" / "atlas.toml", ROOT / "instances" / "atlas-points.toml")
#: the clustering campaign: a k grid (its table answers a ladder of cost tolerances), not a search
CLUSTERING_SPEC = ROOT / "instances" / "atlas-clustering.toml"
#: the integer programs: searched like SPECS, with a time cap on the projected MIP alone
MILP_SPEC = ROOT / "instances" / "atlas-milp.toml"
#: every atlas spec, in the order of calib.atlas.ATLAS_FILES
ALL_SPECS = SPECS + (CLUSTERING_SPEC, MILP_SPEC)
#: every family class the atlas must hold (lp-planted with and without a rank)
CLASSES = {"lp-planted rank", "lp-planted", "lp-covering", "lp-quantile", "lp-basis-pursuit", "lp-transport",
           "sdp-maxcut", "qp-portfolio", "points-gaussian"}


@pytest.fixture(scope="module")
def table_file(tmp_path_factory):
    store = Store.open_existing(run_campaign_in(tmp_path_factory.mktemp("campaign")))
    try:
        table = build_table(store, make_predicate("bound"), Confidence(), taus=[0.05])
    finally:
        store.close()
    path = tmp_path_factory.mktemp("table") / "safe_k.json"
    write_table(table, json_path=path)
    return path


def _lookup_json(capsys, *argv: str) -> dict:
    assert main(["lookup", *argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("size, scope", [({"rows": 60, "cols": 120}, "instances"),   # a measured size
                                         ({"rows": 90, "cols": 180}, "instances"),   # between sizes: the law
                                         ({"rows": 2000, "cols": 4000}, "class")])   # extrapolated, class scope
def test_safe_k_gives_the_answer_of_calib_lookup(table_file, capsys, size, scope):
    ours = atlas.safe_k("lp-planted", size, "gaussian", scope=scope, table=table_file, params={"rank": 8})
    text = ",".join(f"{key}={value}" for key, value in size.items())
    theirs = _lookup_json(capsys, str(table_file), "--family", "lp-planted", "--size", text, "--param", "rank=8",
                          "--projector", "gaussian", "--scope", scope)
    assert ours == theirs
    assert ours["n"] == size["cols"] + 1 and ours["m"] == size["rows"]  # the family's rule (lp: cols + 1, rows)


def test_the_atlas_comes_from_the_environment_file_or_folder(table_file, capsys, monkeypatch):
    direct = atlas.safe_k("lp-planted", {"rows": 60, "cols": 120}, "gaussian", scope="instances", table=table_file)
    monkeypatch.setenv(atlas.ENV, str(table_file))
    assert atlas.safe_k("lp-planted", {"rows": 60, "cols": 120}, "gaussian", scope="instances") == direct
    monkeypatch.setenv(atlas.ENV, str(table_file.parent))  # a folder holding safe_k.json
    assert atlas.safe_k("lp-planted", {"rows": 60, "cols": 120}, "gaussian", scope="instances") == direct
    # `calib lookup` without a table argument reads the same atlas
    assert _lookup_json(capsys, "--family", "lp-planted", "--size", "rows=60,cols=120", "--projector", "gaussian",
                        "--scope", "instances") == direct
    assert direct["safe_k"] is not None and direct["method"] == "measured at this size"


def test_a_missing_atlas_is_one_line_saying_make_atlas_creates_it(tmp_path, capsys, monkeypatch):
    monkeypatch.delenv(atlas.ENV, raising=False)
    monkeypatch.setattr(atlas, "SHIPPED", tmp_path / "no-atlas")
    with pytest.raises(InputError, match="make atlas"):
        atlas.safe_k("lp-planted", {"rows": 60, "cols": 120}, "gaussian")
    assert main(["lookup", "--family", "lp-planted", "--size", "rows=60,cols=120", "--projector", "gaussian"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "no atlas is shipped yet" in err and "`make atlas` creates it" in err
    monkeypatch.setenv(atlas.ENV, str(tmp_path))  # an empty folder named by the environment
    with pytest.raises(InputError, match=f"{atlas.ENV}="):
        atlas.load_table("lp-planted")


def test_bad_questions_are_refused_naming_the_field(table_file):
    with pytest.raises(InputError, match="--size"):
        atlas.safe_k("lp-planted", {"rows": 60, "width": 3}, "gaussian", table=table_file)
    with pytest.raises(InputError, match="no entries"):
        atlas.safe_k("lp-planted", {"rows": 60, "cols": 120}, "srht", table=table_file)
    with pytest.raises(InputError, match="no such table file"):
        atlas.safe_k("lp-planted", {"rows": 60, "cols": 120}, "gaussian", table=table_file.parent / "none.json")


def _n_range(cell) -> tuple[int, int]:
    family = get(cell.name)
    points = [family.n_points(size) for size in cell.sizes]
    return min(points), max(points)


@pytest.mark.parametrize("path", SPECS, ids=lambda path: path.name)
def test_the_atlas_specs_keep_their_design(path):
    # The design the atlas's comments state (common practice of calib's own README: 29 instances for
    # a class claim at 90% / 95%): four sizes over a decade of n, four projectors, a k search.
    spec = load_spec(path)
    assert spec.k_grid.is_search and spec.target is not None
    assert len(spec.projectors) == 4
    assert (spec.target.delta, spec.target.confidence) == (0.1, 0.95)
    assert math.ceil(math.log(0.05) / math.log(0.9)) == 29  # 29 of 29 certify 0.9 at 95% (Clopper-Pearson)
    for cell in spec.families:
        low, high = _n_range(cell)
        assert len(cell.sizes) >= 4 and high >= 10 * low, (cell.name, low, high)
        assert cell.instances >= 29


def test_the_clustering_atlas_spec_keeps_its_design():
    # Its comments: a grid, 29 instances x 3 replicates per size (29 of 29 certify 0.9 at 95%), every
    # clustering family and both methods, sizes spanning at least 2x in K (the clustering n)
    spec = load_spec(CLUSTERING_SPEC)
    assert not spec.k_grid.is_search and spec.replicates == 3
    classes = set()
    for cell in spec.families:
        family = get(cell.name)
        assert family.kind == "clustering" and cell.instances >= 29
        classes.add((cell.name, cell.sizes[0]["method"]))
        low, high = _n_range(cell)
        assert high >= 2 * low
    assert classes == {("cluster-mixture", "lloyd"), ("cluster-mixture", "sized"), ("cluster-digits", "lloyd")}


def test_the_milp_atlas_spec_keeps_its_design():
    # Its comments: the design of the other atlas specs (search to m/2, 29 instances, four projectors,
    # n over a decade) for both MILP families, and a time cap of the projected MIP
    spec = load_spec(MILP_SPEC)
    assert spec.k_grid.is_search and len(spec.projectors) == 4 and spec.solver.get("projected_time_limit_s")
    assert {cell.name for cell in spec.families} == {"milp-knapsack", "milp-cover"}
    for cell in spec.families:
        low, high = _n_range(cell)
        assert len(cell.sizes) >= 4 and high >= 10 * low and cell.instances >= 29


def test_the_atlas_covers_every_family_class_with_projected_caps():
    found = set()
    for path in SPECS:
        spec = load_spec(path)
        for cell in spec.families:
            found.add(cell.name + (" rank" if cell.sizes[0].get("rank") is not None else ""))
            if get(cell.name).kind != "points":
                assert spec.solver.get("projected_time_limit_s") and spec.solver.get("projected_max_iters"), path
    assert found == CLASSES


def _shipped() -> list[Path]:
    return [atlas.SHIPPED / name for name in atlas.ATLAS_FILES if (atlas.SHIPPED / name).is_file()]


@pytest.mark.skipif(not _shipped(), reason="no atlas committed yet under results/atlas/ (`make atlas` creates it)")
@pytest.mark.parametrize("name", atlas.ATLAS_FILES)
def test_the_shipped_atlas_validates_and_its_checksum_matches(name):
    path = atlas.SHIPPED / name
    if not path.is_file():
        pytest.skip(f"{path} is not committed")
    table = json.loads(path.read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(schema()).validate(table)
    body = {key: value for key, value in table.items() if key != "checksum"}
    canonical = json.dumps(body, sort_keys=True, separators=(",", ":"), allow_nan=False)
    assert table["checksum"] == "sha256:" + hashlib.sha256(canonical.encode("utf-8")).hexdigest()


#: one cell per atlas file, cheap to re-run here: (spec, family, size index, projector, predicate, tau)
RERUN = [(SPECS[0], "lp-transport", 0, "countsketch", "bound", 0.05),
         (SPECS[1], "points-gaussian", 0, "srht", "distortion", 0.3),
         (CLUSTERING_SPEC, "cluster-mixture", 0, "gaussian", "clustering", 0.05),
         (MILP_SPEC, "milp-cover", 0, "gaussian", "usable", 0.05)]


def _entry(table: dict, tau: float, family: str, projector: str, n_points: int) -> dict:
    analysis = next(item for item in table["analyses"] if item["tau"] == tau)
    return next(entry for entry in analysis["entries"]
                if (entry["family"], entry["projector"], entry["n_points"]) == (family, projector, n_points))


@pytest.mark.skipif(not _shipped(), reason="no atlas committed yet under results/atlas/ (`make atlas` creates it)")
@pytest.mark.parametrize("spec_path, family, size_index, projector, preset, tau", RERUN, ids=lambda item: str(item))
def test_one_atlas_cell_run_again_here_gives_the_committed_numbers(tmp_path, spec_path, family, size_index,
                                                                  projector, preset, tau):
    # Reproduction, on a sample: one cell of the committed atlas, run again from its spec alone (same
    # root seed, instances, replicates, target and solver limits), searches the same k with the same
    # outcomes, so its table entry carries the committed numbers. `make atlas` reruns all cells.
    import tomllib

    from calib.sweep.runner import run_campaign
    from calib.sweep.spec import parse_spec

    raw = tomllib.loads(spec_path.read_text(encoding="utf-8"))
    cell = next(item for item in raw["families"] if item["name"] == family)
    raw["families"] = [dict(cell, sizes=[cell["sizes"][size_index]])]
    raw["sweep"]["projectors"] = [projector]
    spec = parse_spec(raw, source=str(spec_path))
    summary = run_campaign(spec, tmp_path, workers=2)
    store = Store.open_existing(summary.store_path)
    try:
        table = build_table(store, make_predicate(preset), Confidence(), taus=[tau])
    finally:
        store.close()
    name = atlas.ATLAS_FILES[ALL_SPECS.index(spec_path)]
    committed = json.loads((atlas.SHIPPED / name).read_text(encoding="utf-8"))
    n_points = get(family).n_points(cell["sizes"][size_index] | cell.get("params", {}))
    ours, theirs = (_entry(item, tau, family, projector, n_points) for item in (table, committed))
    assert ours == theirs


def test_lookup_from_the_atlas_stays_light(monkeypatch):
    # `calib lookup` without a table imports no heavy library either (the rule of tests/test_cli_light.py).
    from test_cli_light import HEAVY, TABLE, imported_by

    monkeypatch.setenv(atlas.ENV, TABLE)
    loaded = imported_by("lookup", "--family", "lp-planted", "--projector", "gaussian", "--size", "rows=12,cols=24")
    assert "calib.atlas" in loaded
    assert sorted(name for name in loaded if name in HEAVY or name.startswith(tuple(f"{h}." for h in HEAVY))) == []
