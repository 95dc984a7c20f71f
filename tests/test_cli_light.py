"""The light commands start fast because they import no heavy library they do not use.

Start-up time is measured as a whole process by ``tests/benchmarks/test_bench_cli.py`` (a benchmark,
never a timed test). What can be checked deterministically is the cause: the modules a command
imports. ``calib --help``, ``calib bounds``, ``calib families`` and ``calib lookup`` must not import
pandas, the plotting library, the solvers or ``scipy.stats`` (each costs 0.3–1 s to import on the 2-core machines
calib is built for; measured with ``python -X importtime``).
"""

from __future__ import annotations

import json
import subprocess
import sys

from pathlib import Path

import pytest

TABLE = str(Path(__file__).parent / "corpus" / "tables" / "valid.json")
LOOKUP = ("lookup", TABLE, "--family", "lp-planted", "--projector", "gaussian")

HEAVY = ("pandas", "matplotlib", "highspy", "scs", "scipy.stats", "sklearn", "statsmodels", "distributed")

PROGRAM = """
import json, sys
from calib.cli import main
try:
    main(sys.argv[1:])
except SystemExit:
    pass
print(json.dumps(sorted(sys.modules)), file=sys.stderr)
"""


def imported_by(*argv: str) -> set[str]:
    """Module names loaded by one ``calib ARGV`` run in a fresh interpreter."""
    done = subprocess.run([sys.executable, "-c", PROGRAM, *argv], capture_output=True, text=True, timeout=120)
    return set(json.loads(done.stderr.strip().splitlines()[-1]))


@pytest.mark.parametrize("argv", [("--help",), ("bounds", "--n", "1001", "--eps", "0.2"), ("families",),
                                  ("families", "lp-quantile"), (*LOOKUP, "--size", "rows=12,cols=24"),
                                  (*LOOKUP, "--n", "5000", "--m", "400", "--scope", "instances"),
                                  (*LOOKUP, "--n", "25", "--k", "6", "--json"),
                                  (*LOOKUP, "--size", "rows=12,cols=24", "--delta", "0.2", "--confidence", "0.9")])
def test_light_commands_import_no_heavy_library(argv):
    loaded = imported_by(*argv)
    assert "calib.cli" in loaded  # the probe really ran the command line
    heavy = sorted(name for name in loaded if name in HEAVY or name.startswith(tuple(f"{h}." for h in HEAVY)))
    assert heavy == [], f"calib {' '.join(argv)} imports {heavy[:5]}"
