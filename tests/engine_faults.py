"""The fault-injection plugin of the engine tests and the fixture that installs it.

The plugin source below is written into a temporary folder only while a test that asks for the
``fault_plugin`` fixture runs (so pytest's module collection never imports it and no other test
sees its family), put on ``sys.path`` (worker processes inherit it) and named in
``CALIB_PLUGINS``; afterwards its family and handler are removed from the registries.
"""

from __future__ import annotations

import sys

import pytest

PLUGIN_NAME = "engine_fault_plugin"

PLUGIN_SOURCE = '''"""Test-only plugin, loaded only through ``CALIB_PLUGINS=engine_fault_plugin``.

Registers the family ``test-faulty-lp`` (a planted LP, problem kind ``lp-faulty``) whose handler
misbehaves on purpose, chosen by k so that one campaign holds every kind of failure:

- k = 1: the trial raises RuntimeError;
- k = 2: the trial dereferences a null pointer (SIGSEGV kills its worker process);
- k = 3: the trial sleeps for an hour (only the external trial_timeout_s stops it);
- k = 5: the trial writes its process id to the file named by ``CALIB_TEST_PID_FILE`` and waits
  to be killed from outside (a test plays the OOM killer);
- any other k: a normal LP trial.

The family parameter ``original = "segfault"`` makes the original solve crash its worker instead.
Nothing in calib imports this module; normal specs cannot reach it.
"""

import ctypes
import os
import time

from calib.families import REGISTRY, register
from calib.families.base import Family
from calib.reduce import HANDLERS
from calib.reduce.lp import LPHandler

FAULTS_BY_K = {1: "raise", 2: "segfault", 3: "hang", 5: "await-kill"}


def _misbehave(fault: str) -> None:
    if fault == "raise":
        raise RuntimeError("injected failure for the engine tests")
    if fault == "segfault":
        ctypes.string_at(0)  # reads address 0: SIGSEGV
    if fault == "hang":
        time.sleep(3600)
    if fault == "await-kill":
        with open(os.environ["CALIB_TEST_PID_FILE"] + ".part", "w") as handle:
            handle.write(str(os.getpid()))
        os.replace(os.environ["CALIB_TEST_PID_FILE"] + ".part", os.environ["CALIB_TEST_PID_FILE"])
        time.sleep(3600)


class FaultyLPHandler(LPHandler):
    kind = "lp-faulty"

    @staticmethod
    def solve_baseline(lp, solver):
        if lp.name.endswith("|segfault"):
            _misbehave("segfault")
        return LPHandler.solve_baseline(lp, solver)

    @staticmethod
    def trial_records(lp, original, projector, retrievals, solver, baseline=None):
        _misbehave(FAULTS_BY_K.get(projector.k, "none"))
        return LPHandler.trial_records(lp, original, projector, retrievals, solver, baseline)


def _build(params, rng):
    planted = REGISTRY["lp-planted"]
    lp, info = planted.build({**planted.defaults, "rows": params["rows"], "cols": params["cols"]}, rng)
    if params["original"] == "segfault":
        lp.name += "|segfault"
    return lp, info


if "test-faulty-lp" not in REGISTRY:
    HANDLERS[FaultyLPHandler.kind] = FaultyLPHandler
    register(Family(
        name="test-faulty-lp", kind=FaultyLPHandler.kind,
        description="Test-only planted LP whose trials raise, segfault or hang depending on k.",
        size_keys=("rows", "cols"), defaults={"rows": None, "cols": None, "original": "ok"},
        param_doc={"rows": "rows", "cols": "columns", "original": "'ok' or 'segfault'"},
        build=_build, projected_dim=lambda p: p["rows"], n_points=lambda p: p["cols"] + 1,
    ))
'''


@pytest.fixture
def fault_plugin(tmp_path_factory, monkeypatch):
    """Install the fault plugin for one test; yields its module name."""
    from calib.families import REGISTRY
    from calib.reduce import HANDLERS
    from calib.sweep import plugins

    folder = tmp_path_factory.mktemp("plugin")
    (folder / f"{PLUGIN_NAME}.py").write_text(PLUGIN_SOURCE, encoding="utf-8")
    monkeypatch.syspath_prepend(str(folder))
    monkeypatch.setenv(plugins.ENV_VAR, PLUGIN_NAME)
    yield PLUGIN_NAME
    REGISTRY.pop("test-faulty-lp", None)
    HANDLERS.pop("lp-faulty", None)
    sys.modules.pop(PLUGIN_NAME, None)
    plugins._loaded.discard(PLUGIN_NAME)
