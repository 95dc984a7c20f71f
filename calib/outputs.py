"""Output files the user names on the command line (``--json``, ``--csv``, ``--html``...).

Rule (docs/spec.md, "Where calib writes"): calib writes the store under ``--out`` with a name
derived from the validated campaign name, and otherwise only the exact files the user names.
Those are the user's explicit choice, so any path is accepted, ``../x`` included; nothing read
from a spec, a store or a table ever becomes an output path.

Every file is written whole or not at all: the bytes go to a temporary file beside the target,
which then replaces it (``os.replace``, atomic on POSIX), so a full disk or a crash never leaves
a truncated table where a good one was. A failure is an :class:`~calib.errors.InputError` naming
the file, the reason and the fix.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Union

from calib.errors import InputError


def write_file(path: Union[str, Path], data: Union[str, bytes], option: str = "") -> Path:
    """Write ``data`` (text as UTF-8) to ``path``, creating its folder; returns the path.

    ``option`` names the command-line option the path came from (shown in the message).

    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> write_file(folder / "sub" / "a.txt", "hello").read_text()
    'hello'
    """
    path = Path(path)
    label = f"{option} {path}" if option else str(path)
    payload = data.encode("utf-8") if isinstance(data, str) else data
    check_target(path, option)
    temporary = None
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        handle, temporary = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
        with os.fdopen(handle, "wb") as stream:
            stream.write(payload)
        os.chmod(temporary, _file_mode())
        os.replace(temporary, path)
        temporary = None
    except OSError as error:
        raise InputError(label, f"cannot write: {error.strerror or error}",
                         "choose a writable path on a disk with free space") from None
    finally:
        if temporary is not None:
            try:
                os.unlink(temporary)
            except OSError:
                pass
    return path


def check_target(path, option: str = "") -> None:
    """Refuse an output path that is an existing folder before any work is done."""
    if path is not None and Path(path).is_dir():
        raise InputError(f"{option} {path}" if option else str(path), "is a folder", "give a file name inside it")


def _file_mode() -> int:
    """The mode a plain ``open(path, "w")`` would give a new file (0o666 minus the umask)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask
