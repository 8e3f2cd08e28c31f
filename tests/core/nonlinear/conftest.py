"""Nonlinear-engine test helpers: the NIST min-LRE table printed at the end of the session."""

from __future__ import annotations

# (dataset, start) -> (min LRE of estimates, of standard errors, LRE of the RSS, note)
NIST_NONLINEAR_LRE: dict[tuple[str, str], tuple[float, float, float, str]] = {}


def pytest_terminal_summary(terminalreporter):
    if not NIST_NONLINEAR_LRE:
        return
    terminalreporter.write_sep("-", "NIST StRD nonlinear: minimum LRE per dataset and start")
    terminalreporter.write_line(f"{'dataset':10s} {'start':7s} {'estimates':>9s} "
                                f"{'std.err':>8s} {'RSS':>6s}")
    for (name, start), (est, se, rss, note) in sorted(NIST_NONLINEAR_LRE.items()):
        terminalreporter.write_line(f"{name:10s} {start:7s} {est:9.2f} {se:8.2f} {rss:6.2f} "
                                    f"{note}")
