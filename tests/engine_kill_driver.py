"""Test-only driver: ``python engine_kill_driver.py MODE N calib-args...`` runs the calib CLI and
kills its own process with SIGKILL at one exact point of the coordinator's store writes:

- ``mid-trial-transaction``: during the N-th trial transaction, after its INSERTs, before COMMIT;
- ``after-trial-commit``: right after the N-th trial transaction committed;
- ``mid-instance-transaction``: during the N-th original-solve transaction, before COMMIT;
- ``after-instance-commit``: right after the N-th original solve was committed.
"""

import os
import signal
import sys

from calib.store import database as store_module

_armed = {"kill": False}


class _KillingTransaction(store_module.Transaction):
    def __exit__(self, kind, value, traceback):
        if _armed["kill"]:
            os.kill(os.getpid(), signal.SIGKILL)
        return super().__exit__(kind, value, traceback)


def _wrap(method_name: str, count: int, before_commit: bool) -> None:
    original = getattr(store_module.Store, method_name)
    calls = {"n": 0}

    def patched(self, *args, **kwargs):
        calls["n"] += 1
        _armed["kill"] = before_commit and calls["n"] == count
        result = original(self, *args, **kwargs)
        if not before_commit and calls["n"] == count:
            os.kill(os.getpid(), signal.SIGKILL)
        return result

    setattr(store_module.Store, method_name, patched)


def main() -> int:
    mode, count, cli_args = sys.argv[1], int(sys.argv[2]), sys.argv[3:]
    store_module.Transaction = _KillingTransaction
    target, when = {"mid-trial-transaction": ("add_trial_rows", True), "after-trial-commit": ("add_trial_rows", False),
                    "mid-instance-transaction": ("add_instance", True), "after-instance-commit": ("add_instance", False)}[mode]
    _wrap(target, count, when)
    from calib.cli import main as cli_main

    return cli_main(cli_args)


if __name__ == "__main__":
    sys.exit(main())
