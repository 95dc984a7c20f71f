"""Words of calib's printed output: counts with their nouns, so no line says "1 instances".

Pure functions of their arguments, no import beyond the standard library (light commands use them).
"""

from __future__ import annotations


def counted(count: int, word: str) -> str:
    """``count`` with ``word``, plural unless count is 1 (English plurals in -s, common practice).

    >>> counted(1, "instance"), counted(3, "replicate"), counted(0, "trial")
    ('1 instance', '3 replicates', '0 trials')
    """
    return f"{count} {word}" if count == 1 else f"{count} {word}s"


def byte_size(count: float) -> str:
    """A number of bytes in binary units (KiB = 1024 bytes, IEC 80000-13), 3 significant digits.

    >>> byte_size(16 * 10**12), byte_size(2048), byte_size(12)
    ('14.6 TiB', '2 KiB', '12 B')
    """
    for unit in ("B", "KiB", "MiB", "GiB", "TiB"):
        if count < 1024 or unit == "TiB":
            return f"{count:.3g} {unit}"
        count /= 1024
