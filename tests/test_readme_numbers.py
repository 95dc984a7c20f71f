"""Every number the README quotes about a shipped file agrees with that file.

The shipped files are the demo run the README quotes (``results/demo/``: what ``make demo`` printed,
its table, timings and report) and the atlas (``results/atlas/``). The README's numbers about them
sit in generated sections that ``tests/readme_numbers.py`` renders from the files alone; these tests
render them again and compare, so a number cannot drift from its file (after a new run, ``make
demo-reference`` or ``python tests/readme_numbers.py --write`` writes them). The few facts quoted in
the prose around them (the table's format version, the atlas design and its duration, the demo
scenario's sizes) are checked here against the files and specs they describe.
"""

from __future__ import annotations

import json
import re
import tomllib

import pytest

import readme_numbers
from readme_numbers import ATLAS, DEMO, README, ROOT, quoted, sections

TEXT = README.read_text(encoding="utf-8")
ATLAS_SECTIONS = {"lookup", "atlas-lp", "atlas-points", "atlas-run", "decision", "atlas-large"}
DEMO_SECTIONS = {"demo-screen", "demo-story", "demo-detail"}


def test_the_readme_holds_every_generated_section():
    expected = ATLAS_SECTIONS | (DEMO_SECTIONS if (DEMO / "safe_k.json").is_file() else set())
    assert set(quoted(TEXT)) == expected


@pytest.mark.parametrize("name", sorted(ATLAS_SECTIONS | DEMO_SECTIONS))
def test_each_generated_section_is_what_the_files_give(name):
    made = sections()
    if name not in made:
        pytest.skip(f"{DEMO} is not shipped")
    assert quoted(TEXT)[name] == made[name], (
        f"README section {name!r} differs from the shipped files: run `python tests/readme_numbers.py --write`")


def test_the_first_screen_is_the_job_the_two_commands_and_the_lookup():
    head = TEXT.splitlines()[:30]
    assert head[0] == "# calib"
    assert "make demo" in "\n".join(head) and "make test" in "\n".join(head)
    assert any(line.startswith("$ calib lookup --family") and line.endswith("--k-only") for line in head)


def test_the_format_version_quoted_is_the_shipped_tables_and_the_code():
    from calib.analysis.tablefile import SCHEMA_FILE, VERSION

    quoted_versions = {int(value) for value in re.findall(r"`format_version` (\d+)", TEXT)}
    shipped = {json.loads((ATLAS / name).read_text())["format_version"] for name in ("safe_k.json", "safe_k-points.json")}
    if (DEMO / "safe_k.json").is_file():
        shipped.add(json.loads((DEMO / "safe_k.json").read_text())["format_version"])
    assert quoted_versions == shipped == {VERSION}
    assert f"calib/schemas/{SCHEMA_FILE}" in TEXT and (ROOT / "calib" / "schemas" / SCHEMA_FILE).is_file()


def _spec(name: str) -> dict:
    return tomllib.loads((ROOT / "instances" / name).read_text(encoding="utf-8"))


def test_the_atlas_design_quoted_is_its_specs():
    instances, replicates = map(int, re.search(r"(\d+) instances × (\d+) replicates drawn per size", TEXT).groups())
    for name in ("atlas.toml", "atlas-points.toml"):
        spec = _spec(name)
        assert spec["campaign"]["replicates"] == replicates
        assert {cell["instances"] for cell in spec["families"]} == {instances}
        assert len(spec["sweep"]["projectors"]) == 4 and all(len(cell["sizes"]) == 4 for cell in spec["families"])


def test_every_statement_of_the_atlas_duration_agrees():
    # "about an hour" beside "about 40 minutes" was the drift; the README's parts must also add up
    start = TEXT.index("Making the atlas took")
    minutes = [float(value) for value in re.findall(r"([\d.]+) min\b", TEXT[start:TEXT.index("\n\n", start)])]
    stated = int(re.search(r"Making the atlas took about (\d+) minutes", TEXT).group(1))
    assert round(sum(minutes) / 10) * 10 == stated, (minutes, stated)
    for path in (ROOT / "Makefile", ROOT / "DEVELOPERS.md", ROOT / "README.md"):
        for line in path.read_text(encoding="utf-8").splitlines():
            if "atlas" in line.lower() and re.search(r"about (an hour|\d+ minutes)", line):
                assert f"about {stated} minutes" in line, (path.name, line)


def test_the_demo_scenario_quoted_is_the_quickstart_spec():
    spec = _spec("quickstart.toml")
    cells = {cell["name"]: cell for cell in spec["families"]}
    pursuit = [size["measurements"] for size in cells["lp-basis-pursuit"]["sizes"]]
    lengths = [size["length"] for size in cells["lp-basis-pursuit"]["sizes"]]
    jobs = [size["rows"] for size in cells["lp-quantile"]["sizes"]]
    assert f"{min(pursuit)}–{max(pursuit)} pressure readings" in TEXT
    assert f"{cells['lp-basis-pursuit']['params']['sparsity']} leaks" in TEXT
    assert f"{min(lengths)}–{readme_numbers.number(max(lengths))} candidate pipe segments" in TEXT
    assert f"{min(jobs)}–{max(jobs)}\n  past jobs" in TEXT or f"{min(jobs)}–{max(jobs)} past jobs" in TEXT
    assert {size["features"] for size in cells["lp-quantile"]["sizes"]} == {int(re.search(r"(\d+) features", TEXT).group(1))}


@pytest.mark.skipif(not (DEMO / "run.txt").is_file(), reason="no demo run shipped")
def test_the_demo_time_claimed_is_the_shipped_runs():
    facts = readme_numbers.run_facts((DEMO / "run.txt").read_text(encoding="utf-8"))
    claimed = int(re.search(r"make demo +# under (\d+) minutes on 2 cores", TEXT).group(1))
    assert facts["total"] is not None and facts["total"] < 60 * claimed
