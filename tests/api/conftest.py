"""API-test hooks: the NIST nonlinear table of test_expression_nist.py, printed at the end."""

from __future__ import annotations


def pytest_terminal_summary(terminalreporter):
    from tests.api.test_expression_nist import TABLE

    if not TABLE:
        return
    terminalreporter.write_sep("-", "NIST StRD nonlinear over /v1/fit (expression family): "
                                    "minimum LRE")
    terminalreporter.write_line(f"{'dataset':10s} {'start':7s} {'estimates':>9s} "
                                f"{'std.err':>8s} {'RSS':>6s}")
    for (name, start), (est, se, rss) in sorted(TABLE.items(), key=lambda i: i[0][0].lower()):
        note = "  (RSS at rounding level; SE as SE/sd)" if name == "Lanczos1" else ""
        terminalreporter.write_line(f"{name:10s} {start:7s} {est:9.2f} {se:8.2f} {rss:6.2f}"
                                    f"{note}")
