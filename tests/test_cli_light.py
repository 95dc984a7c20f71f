"""The light commands start fast because they import no heavy library they do not use.

Start-up time is measured as a whole process by ``tests/benchmarks/test_bench_cli.py`` (a benchmark,
never a timed test). What can be checked deterministically is the cause: the modules a command
imports. ``calib --help``, ``calib bounds`` and ``calib families`` must not import pandas, the
plotting library, the solvers or ``scipy.stats`` (each costs 0.3–1 s to import on the 2-core machines
calib is built for; measured with ``python -X importtime``).
"""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

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
                                  ("families", "lp-quantile")])
def test_light_commands_import_no_heavy_library(argv):
    loaded = imported_by(*argv)
    assert "calib.cli" in loaded  # the probe really ran the command line
    heavy = sorted(name for name in loaded if name in HEAVY or name.startswith(tuple(f"{h}." for h in HEAVY)))
    assert heavy == [], f"calib {' '.join(argv)} imports {heavy[:5]}"
