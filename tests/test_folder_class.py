"""A folder of the user's own MPS files as one class, and the policy rule k = f m certified over it."""

from __future__ import annotations

import json
import shutil

import numpy as np
import pytest
from scipy import stats

from calib.analysis.classrule import fraction_rule
from calib.cli import main
from calib.families.lp_real import NETLIB_DIR
from calib.sweep.spec import load_spec

FILES = ("afiro", "sc50a", "sc50b", "sc105")

SPEC = """
[campaign]
name = "folder-class"
root_seed = 5
replicates = 3

[[families]]
name = "mps-dir"
params = {{dir = "{folder}"}}

[sweep]
projectors = ["gaussian"]
k = {{fractions = [0.5, 1.0]}}
retrievals = ["basis-lstsq"]

[solver]
time_limit_s = 20
"""


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    path = tmp_path_factory.mktemp("models")
    for name in FILES:
        shutil.copy(NETLIB_DIR / "feasible" / f"{name}.mps", path / f"{name}.mps")
    return path


def test_a_folder_alone_makes_every_file_a_size_of_one_class(folder, tmp_path):
    spec_path = tmp_path / "spec.toml"
    spec_path.write_text(SPEC.format(folder=folder.as_posix()))
    (cell,) = load_spec(spec_path).families
    assert [size["name"] for size in cell.sizes] == sorted(f"{name}.mps" for name in FILES)
    assert {size["dir"] for size in cell.sizes} == {str(folder.as_posix())}


def test_a_folder_of_netlib_lps_runs_as_one_class_and_the_rule_is_refused_by_the_instance_level_rule(folder, tmp_path, capsys):
    # Four real Netlib LPs (Netlib lp/data, vendored) are four units: below the 29 that certify 0.9 at
    # 95% when each file decides alone (Clopper-Pearson, 0.05^(1/29) = 0.902), so the rule k = f m
    # must be refused with that reason, whatever the files' own rates.
    spec_path = tmp_path / "spec.toml"
    spec_path.write_text(SPEC.format(folder=folder.as_posix()))
    assert main(["run", str(spec_path), "--out", str(tmp_path / "out"), "--in-process", "--quiet"]) == 0
    table_path = tmp_path / "t.json"
    assert main(["tables", str(tmp_path / "out" / "folder-class.sqlite"), "--json", str(table_path)]) == 0
    analysis = json.loads(table_path.read_text())["analyses"][0]
    (law,) = analysis["laws"]
    assert law["family"] == "mps-dir" and law["class_params"]["dir"] == folder.as_posix()
    assert sorted(entry["size"] for entry in analysis["entries"]) == sorted(f"name={name}.mps" for name in FILES)
    rule = law["policy_rule"]
    assert rule["units"] == 4 and rule["unit"] == "file" and rule["fraction"] is None
    assert "4 files cannot certify 90% at 95% confidence" in rule["reason"] and "29 are needed" in rule["reason"]
    assert [point["fraction"] for point in rule["grid"]] == [0.5, 1.0]
    assert all(point["trials"] == 4 * 3 for point in rule["grid"])
    assert "no swept fraction" in capsys.readouterr().out


def test_the_rule_is_certified_over_enough_files_and_lists_the_failing_ones():
    # 70 files, one trial each per fraction (design effect 1, so the bound is Clopper-Pearson on files):
    # at f = 0.3, 68 of 70 succeed, exact one-sided 95% bound 0.9128 >= 0.9 (scipy.stats.binomtest,
    # lower end of the two-sided 90% interval); at f = 0.1 only 60 of 70; f = 0.6 all.
    labels, unit, success = [], [], []
    for fraction, failing in ((0.1, range(10)), (0.3, (3, 7)), (0.6, ())):
        for file in range(70):
            labels.append(f"fraction={fraction}")
            unit.append(f"m{file:02d}")
            success.append(0 if file in failing else 1)
    names = {f"m{file:02d}": f"model{file:02d}.mps" for file in range(70)}
    rule = fraction_rule(labels, np.array(unit), np.array(success), names, 0.9, 0.95, "file")
    bound = stats.binomtest(68, 70).proportion_ci(confidence_level=0.90, method="exact").low
    assert bound >= 0.9 and rule["grid"][1]["class_lower_bound"] == pytest.approx(bound, rel=1e-5)
    assert rule["fraction"] == 0.3 and rule["units"] == 70 and rule["failing"] == ["model03.mps", "model07.mps"]
    assert rule["statement"] == "k = 0.3 m meets the target 90% at 95% confidence on this class (70 files as the unit)"
    # the monotone rule: a passing fraction below a failing one is not trusted
    flipped = [0 if (label == "fraction=0.6" and name in ("m00", "m01", "m02", "m03", "m04", "m05", "m06", "m07")) else ok
               for label, name, ok in zip(labels, unit, success)]
    assert fraction_rule(labels, np.array(unit), np.array(flipped), names, 0.9, 0.95, "file")["fraction"] is None


def test_a_folder_without_mps_files_is_refused_naming_it(tmp_path, capsys):
    empty = tmp_path / "empty"
    empty.mkdir()
    spec_path = tmp_path / "spec.toml"
    spec_path.write_text(SPEC.format(folder=empty.as_posix()))
    assert main(["run", str(spec_path), "--out", str(tmp_path / "out"), "--dry-run", "--no-probe"]) == 2
    assert "holds no MPS file" in capsys.readouterr().err
