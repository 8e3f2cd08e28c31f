"""Nonlinear test helpers: the stored NIST StRD nonlinear files (read at run time through
the one reference-folder helper, never copied) and the min-LRE table printed at the end."""

from __future__ import annotations

import json

import pytest

from tests.conftest import reference_file

# (dataset, start) -> (min LRE of estimates, of standard errors, LRE of the RSS, note)
NIST_NONLINEAR_LRE: dict[tuple[str, str], tuple[float, float, float, str]] = {}
# built-in family -> its simulation score (tests/core/nonlinear/builtin_simulation.Score)
BUILTIN_SCORES: dict[str, object] = {}


@pytest.fixture
def nist_nonlinear():
    """Loader of ``<reference folder>/nist-strd-nonlinear/<name>.json`` (skips when absent,
    fails under CURVEWISE_REQUIRE_REFERENCE=1)."""

    def load(name: str) -> dict:
        return json.loads(reference_file(f"nist-strd-nonlinear/{name}.json").read_text())
    return load


def pytest_terminal_summary(terminalreporter):
    if BUILTIN_SCORES:
        _builtin_scores(terminalreporter)
    if not NIST_NONLINEAR_LRE:
        return
    terminalreporter.write_sep("-", "NIST StRD nonlinear: minimum LRE per dataset and start")
    terminalreporter.write_line(f"{'dataset':10s} {'start':7s} {'estimates':>9s} "
                                f"{'std.err':>8s} {'RSS':>6s}")
    for (name, start), (est, se, rss, note) in sorted(NIST_NONLINEAR_LRE.items()):
        terminalreporter.write_line(f"{name:10s} {start:7s} {est:9.2f} {se:8.2f} {rss:6.2f} "
                                    f"{note}")


def _builtin_scores(terminalreporter):
    terminalreporter.write_sep("-", "built-in families: share of seeded series fitted to the "
                                    "global least-squares optimum")
    terminalreporter.write_line(f"{'family':17s} {'series':>6s} {'no opt.':>7s} "
                                f"{'automatic':>9s} {'(unconverged)':>13s} "
                                f"{'curve_fit(1,...)':>16s}")
    for name, score in BUILTIN_SCORES.items():
        ours, other = score.rates()
        terminalreporter.write_line(f"{name:17s} {score.series:6d} "
                                    f"{score.no_finite_optimum:7d} {ours:9.3f} "
                                    f"{score.not_converged:13d} {other:16.3f}")
