"""A small campaign shared by the analysis tests: run it once per test module (about 2 s).

Scenario (invented): a planted LP of rank 8 at three sizes, so the transition sits near k = 8
whatever the size, and a small infeasible LP whose projections stay feasible at small k.
30 replicates of one instance per size: with 30 of 30 successes the one-sided Clopper-Pearson
bound at 95% is 0.05^(1/30) = 0.905 >= 0.9, so a safe k at delta = 0.1 can exist.
"""

from __future__ import annotations

from pathlib import Path

SPEC = """
[campaign]
name = "analysis-check"
root_seed = 7
replicates = 30

[[families]]
name = "lp-planted"
sizes = [{rows = 30, cols = 60}, {rows = 60, cols = 120}, {rows = 120, cols = 240}]
instances = 1
params = {rank = 8, cost = "nonnegative"}

[[families]]
name = "lp-farkas"
sizes = [{rows = 20, cols = 40}]
instances = 1

[sweep]
projectors = ["gaussian"]
k = [3, 5, 6, 7, 8, 9, 10, 12, 16]
retrievals = ["basis-lstsq"]

[solver]
time_limit_s = 10
"""


def run_spec(text: str, folder: Path) -> Path:
    """Write the spec ``text`` under ``folder``, run it, and return the store path."""
    from calib.sweep.runner import run_campaign
    from calib.sweep.spec import load_spec

    folder.mkdir(parents=True, exist_ok=True)
    spec_path = folder / "spec.toml"
    spec_path.write_text(text, encoding="utf-8")
    return run_campaign(load_spec(spec_path), folder / "out").store_path


def run_campaign_in(folder: Path) -> Path:
    """Run the shared campaign under ``folder`` and return the store path."""
    return run_spec(SPEC, folder)
