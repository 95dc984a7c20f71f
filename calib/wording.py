"""Words of calib's printed output: counts with their nouns, so no line says "1 instances", and
lines no wider than :data:`WIDTH` (longer texts wrap under their own indent).

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


#: the widest line of the text views (longer texts wrap, indented under their first line)
WIDTH = 120


def wrapped(text: str, indent: str = "   ", hanging: str = "    ") -> list[str]:
    """``text`` as lines of at most :data:`WIDTH` characters, the first indented by ``indent``, the rest
    by ``hanging`` more (a word longer than the width is kept whole).

    >>> wrapped("a " * 70, "  ")[1].startswith("      a")
    True
    """
    import textwrap

    return textwrap.wrap(text, WIDTH, initial_indent=indent, subsequent_indent=indent + hanging,
                         break_long_words=False, break_on_hyphens=False) or [indent]


def fold(lines: list[str]) -> str:
    """The lines joined, each longer than :data:`WIDTH` wrapped under its own indent (plus six spaces)."""
    out = []
    for line in lines:
        indent = line[:len(line) - len(line.lstrip())]
        out += wrapped(line.strip(), indent, "      ") if line.strip() else [line]
    return "\n".join(out)
