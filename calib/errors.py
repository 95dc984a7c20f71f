"""User-facing errors.

Everything a user can get wrong (a spec field, a file, a CLI value) raises :class:`InputError` with
a one-line message that names the field or file and says what would fix it. The CLI prints that
line and exits with code 2; nothing else in the package catches it.

:func:`describe_exception` puts any other exception on one line (type, text, innermost frame), the
way a failed trial, build or plugin import is recorded and reported.
"""

import traceback
from pathlib import Path


class InputError(ValueError):
    """Bad user input: the message names the field or file and the fix, on one line."""

    def __init__(self, where: str, problem: str, fix: str = ""):
        self.where = where
        self.problem = problem
        self.fix = fix
        text = f"{where}: {problem}"
        if fix:
            text += f" ({fix})"
        super().__init__(text.replace("\n", " "))


def describe_exception(error: BaseException) -> str:
    """``Type: text (at file.py:line)`` of the innermost frame, on one line."""
    frames = traceback.extract_tb(error.__traceback__)
    where = f" (at {Path(frames[-1].filename).name}:{frames[-1].lineno})" if frames else ""
    return f"{type(error).__name__}: {error}{where}".replace("\n", " ")
