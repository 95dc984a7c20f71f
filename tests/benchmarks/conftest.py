"""Collects the benchmark figures of this folder and prints ratios and targets at the end."""

from __future__ import annotations

import pytest

_FIGURES: dict[tuple[str, str], float] = {}
_MEMORY: dict[tuple[str, str], tuple[int, int, int]] = {}


@pytest.fixture(scope="session")
def figures() -> dict[tuple[str, str], float]:
    """(group, label) -> best time in seconds, filled by the benchmarks."""
    return _FIGURES


@pytest.fixture(scope="session")
def memory() -> dict[tuple[str, str], tuple[int, int, int]]:
    """(k, family) -> (input bytes, peak bytes of apply, peak bytes of draw + apply)."""
    return _MEMORY


def pytest_terminal_summary(terminalreporter, exitstatus, config):
    if not _FIGURES and not _MEMORY:
        return
    terminalreporter.write_sep("=", "projector benchmark ratios and targets")
    for line in report_lines(_FIGURES, _MEMORY):
        terminalreporter.write_line(line)


GAUSSIAN_REF = "ref dense Gaussian T@A"
SKLEARN_GAUSSIAN = "ref sklearn GaussianRandomProjection"
SCIPY_CWT = "ref scipy clarkson_woodruff_transform"


def report_lines(figures: dict[tuple[str, str], float], memory: dict[tuple[str, str], tuple[int, int, int]]) -> list[str]:
    lines = []
    for group in sorted({group for group, _ in figures}):
        rows = {label: seconds for (g, label), seconds in figures.items() if g == group}
        base = rows.get(GAUSSIAN_REF)
        lines.append(f"[{group}]  (best of rounds; ratio = dense Gaussian T@A time / this time)")
        for label, seconds in sorted(rows.items(), key=lambda item: item[1]):
            ratio = f"{base / seconds:7.2f}x" if base else ""
            lines.append(f"  {label:48s} {seconds * 1e3:10.1f} ms  {ratio}")
        lines.extend(_targets(group, rows))
    if memory:
        lines.append("[peak memory on the sparse input, tracemalloc]")
        for (k, family), (size, apply_peak, total_peak) in sorted(memory.items()):
            verdict = "meets" if apply_peak < 2 * size else "MISSES"
            lines.append(f"  k={k:5s} {family:12s} input {size / 1e6:6.1f} MB  apply peak {apply_peak / 1e6:7.1f} MB "
                         f"({apply_peak / size:4.2f}x, {verdict} < 2x)  draw+apply peak {total_peak / 1e6:7.1f} MB "
                         f"({total_peak / size:4.2f}x)")
    return lines


def _targets(group: str, rows: dict[str, float]) -> list[str]:
    out = []

    def check(text: str, ok: bool) -> None:
        out.append(f"  target {'met   ' if ok else 'MISSED'}: {text}")

    if "dense" in group and "srht apply" in rows:
        speedup = rows[GAUSSIAN_REF] / rows["srht apply"]
        need = 4.0 if "1024" in group else 1.0
        check(f"SRHT {speedup:.2f}x faster than dense Gaussian (need > {need:g}x)", speedup > need)
    for label in ("countsketch make+apply", "countsketch apply"):
        if label in rows and SCIPY_CWT in rows:
            ratio = rows[SCIPY_CWT] / rows[label]
            check(f"{label} at {ratio:.2f}x SciPy's clarkson_woodruff_transform speed (need >= 1x)", ratio >= 1.0)
    if "gaussian apply" in rows and SKLEARN_GAUSSIAN in rows:
        ratio = rows["gaussian apply"] / rows[SKLEARN_GAUSSIAN]
        check(f"Gaussian apply takes {ratio:.2f}x scikit-learn's transform time (need <= 1.1x)", ratio <= 1.1)
    return out
