"""The analysis reads a stored campaign into the same bytes it did when the golden files were written.

tests/golden/quickstart.sqlite.gz is the store of `make demo` (instances/quickstart.toml) as written at
commit cbbc6ad; tests/golden/quickstart/ holds what `calib tables`, `calib compare` and `calib lookup`
wrote from it then. A restructuring that keeps behaviour keeps every byte (the layers of docs/layers.md
were drawn under this check); a change that means to alter a table rewrites these files in the same
commit and says why. The report's figures are replaced by a marker before the comparison: they are
matplotlib's SVG, whose bytes follow the installed matplotlib, not calib (common practice for
golden-file tests of rendered output).
"""

from __future__ import annotations

import gzip
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

GOLDEN = Path(__file__).resolve().parent / "golden"
EXPECTED = GOLDEN / "quickstart"
FIGURE = re.compile(r"data:image/svg\+xml;base64,[A-Za-z0-9+/=]+")


def _calib(folder: Path, *args: str) -> str:
    done = subprocess.run([sys.executable, "-m", "calib", *args], cwd=folder, capture_output=True,
                          text=True, check=False)
    assert done.returncode == 0, done.stderr
    return done.stdout


@pytest.fixture(scope="module")
def analysed(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("golden")
    with gzip.open(GOLDEN / "quickstart.sqlite.gz") as packed, open(folder / "store.sqlite", "wb") as out:
        shutil.copyfileobj(packed, out)
    tables = _calib(folder, "tables", "store.sqlite", "--tau", "0.01", "0.05", "0.1", "--json", "safe_k.json",
                    "--csv", "safe_k.csv", "--timings", "timings.csv", "--html", "report.html")
    (folder / "tables.txt").write_text(tables, encoding="utf-8")
    compare = _calib(folder, "compare", "store.sqlite", "--json", "compare.json")
    (folder / "compare.txt").write_text(compare, encoding="utf-8")
    lookups = {
        "lookup1.txt": ["--family", "lp-quantile", "--retrieval", "completion", "--size", "rows=2000,features=5"],
        "lookup2.json": ["--family", "lp-basis-pursuit", "--retrieval", "completion",
                         "--size", "measurements=300,length=600", "--json"],
        "lookup3.txt": ["--family", "lp-basis-pursuit", "--retrieval", "basis-lstsq", "--projector", "countsketch",
                        "--size", "measurements=300,length=600", "--k", "40"],
    }
    for name, args in lookups.items():
        (folder / name).write_text(_calib(folder, "lookup", "safe_k.json", *args), encoding="utf-8")
    report = (folder / "report.html").read_text(encoding="utf-8")
    (folder / "report-text.html").write_text(FIGURE.sub("FIGURE", report), encoding="utf-8")
    return folder


@pytest.mark.parametrize("name", sorted(path.name for path in EXPECTED.iterdir()))
def test_output_is_byte_identical(analysed: Path, name: str) -> None:
    assert (analysed / name).read_bytes() == (EXPECTED / name).read_bytes(), \
        f"{name} differs from tests/golden/quickstart/{name}"
