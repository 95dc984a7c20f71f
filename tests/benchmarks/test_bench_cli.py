"""Whole-process start-up of the light commands (pytest-benchmark; skipped in normal runs).

Run: ``pytest tests/benchmarks/test_bench_cli.py --benchmark-only``. Each round starts a fresh
interpreter and runs one command to its end, so the figure is what a user waits for. Target: under
0.5 s each on an idle 2-core machine (the imports behind it are checked in tests/test_cli_light.py).
"""

from __future__ import annotations

import subprocess
import sys

from pathlib import Path

import pytest

TABLE = str(Path(__file__).parents[1] / "corpus" / "tables" / "valid.json")
COMMANDS = {"help": ["--help"], "bounds": ["bounds", "--n", "1001", "--eps", "0.2"], "families": ["families"],
            "lookup": ["lookup", TABLE, "--family", "lp-planted", "--projector", "gaussian", "--size", "rows=12,cols=24"]}


@pytest.mark.parametrize("name", sorted(COMMANDS))
def test_light_command_start(benchmark, name):
    argv = [sys.executable, "-m", "calib", *COMMANDS[name]]
    done = benchmark.pedantic(subprocess.run, args=(argv,), kwargs={"capture_output": True, "check": True},
                              rounds=7, warmup_rounds=1)
    assert done.returncode == 0
    benchmark.extra_info["target_s"] = 0.5
