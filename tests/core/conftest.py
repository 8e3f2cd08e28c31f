"""Core test helpers: NIST digit bookkeeping printed in the terminal summary."""

from __future__ import annotations

import math

NIST_DIGITS: dict[str, float] = {}


def significant_digits(value: float, certified: float) -> float:
    """-log10 of the relative error (17 when identical); certified zeros are handled by callers."""
    if value == certified:
        return 17.0
    return -math.log10(abs(value - certified) / abs(certified))


def pytest_terminal_summary(terminalreporter):
    if NIST_DIGITS:
        terminalreporter.write_sep("-", "NIST StRD: minimum significant digits per dataset")
        for name, digits in sorted(NIST_DIGITS.items()):
            terminalreporter.write_line(f"{name:10s} {digits:6.2f}")
