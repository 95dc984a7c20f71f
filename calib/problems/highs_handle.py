"""The one constructor of a ``highspy.Highs`` handle: quiet from the first one on.

The first ``Highs()`` of a process prints HiGHS's banner (its version and licence, two lines) on
the process's standard output, before any option can turn output off; every later one is silent
(checked with highspy 1.16). calib's outputs on stdout are documents (tables, JSON), so the first
construction runs with file descriptor 1 pointed at /dev/null. Everything that needs a HiGHS handle
gets it here: reading an MPS file (:mod:`calib.problems.mps`, the lowest layer that needs one) and
every solver handle (:func:`calib.solvers.highs.new_highs`, which adds the solvers' own options).

Importing this module imports highspy (about 0.1 s); the light commands reach it only lazily.
"""

from __future__ import annotations

import os
from typing import Optional

import highspy

_banner_silenced = False


def quiet_highs(options: Optional[dict] = None) -> highspy.Highs:
    """A ``highspy.Highs`` with ``options`` (HiGHS option name -> value) set; its banner never printed.

    Raises ValueError naming the option when HiGHS rejects one (a programming error, not user input).
    """
    global _banner_silenced
    if not _banner_silenced:
        _banner_silenced = True
        saved = os.dup(1)
        try:
            with open(os.devnull, "w") as sink:
                os.dup2(sink.fileno(), 1)
                h = highspy.Highs()
        finally:
            os.dup2(saved, 1)
            os.close(saved)
    else:
        h = highspy.Highs()
    for name, value in (options or {}).items():
        status = h.setOptionValue(name, value)
        if status == highspy.HighsStatus.kError:
            raise ValueError(f"HiGHS rejected option {name}={value!r}")
    return h
