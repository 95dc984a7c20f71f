"""Extra families and handlers from modules named in ``CALIB_PLUGINS``.

A plugin is an importable Python module that registers families (:func:`calib.families.register`)
and, for a new problem kind, a handler in :data:`calib.reduce.HANDLERS` when imported. Setting
``CALIB_PLUGINS=module_a,module_b`` is the explicit opt-in: nothing outside that list is ever
imported. The coordinator imports the plugins before validating a spec and sends their names with
every task, so workers (local or on a Dask cluster) import the same modules before running it.
"""

from __future__ import annotations

import importlib
import os

from calib.errors import InputError

#: environment variable holding comma-separated plugin module names
ENV_VAR = "CALIB_PLUGINS"

_loaded: set[str] = set()


def names_from_env() -> tuple[str, ...]:
    """Plugin module names listed in ``CALIB_PLUGINS`` (empty when unset)."""
    text = os.environ.get(ENV_VAR, "")
    return tuple(name.strip() for name in text.split(",") if name.strip())


def load(names: tuple[str, ...]) -> None:
    """Import each named module once; an import failure is a user error naming the module."""
    for name in names:
        if name in _loaded:
            continue
        try:
            importlib.import_module(name)
        except ImportError as error:
            raise InputError(ENV_VAR, f"cannot import plugin module {name!r}: {error}",
                             "make the module importable (PYTHONPATH) or remove it from the list") from None
        except Exception as error:  # noqa: BLE001 - the plugin's own bug, reported on one line
            from calib.errors import describe_exception

            raise InputError(ENV_VAR, f"plugin module {name!r} failed while importing: {describe_exception(error)}",
                             "fix the plugin (import it in Python to see the full traceback)") from None
        _loaded.add(name)


def allowed(names: tuple[str, ...], where: str) -> tuple[str, ...]:
    """``names`` (plugins recorded in a store) if ``CALIB_PLUGINS`` lists every one of them.

    A store or table is data: the module names it records are never imported unless the user
    opted in to them through ``CALIB_PLUGINS``, exactly as for a spec.
    """
    missing = [name for name in names if name not in names_from_env()]
    if missing:
        raise InputError(where, f"was written with plugin module(s) {', '.join(missing)}, which {ENV_VAR} does not list",
                         f"if you trust them, set {ENV_VAR}={','.join(names)} and run again")
    return names


def load_from_env() -> tuple[str, ...]:
    """Import the plugins of ``CALIB_PLUGINS`` and return their names."""
    names = names_from_env()
    load(names)
    return names
