"""Load: 60 s of mixed traffic at 8 concurrent connections against 2 sync workers.

Pass conditions (from the hardening issue): no 5xx and no failed connection over the whole
run, and each worker's resident memory in the last 10 s within 10% of the first 10 s (worker
recycling is switched off, CURVEWISE_MAX_REQUESTS=0, so a leak cannot hide behind restarts).
Latency and throughput are printed for the report, never asserted (rule: no timed assertions).
"""

from __future__ import annotations

import numpy as np
import pytest

from tests.ops.harness import mixed_requests, percentile, run_load, server

pytestmark = [pytest.mark.live, pytest.mark.slow]
SECONDS = 60.0
WINDOW = 10.0


def test_sixty_seconds_of_mixed_traffic():
    with server(workers=2, env={"CURVEWISE_MAX_REQUESTS": "0"}) as srv:
        traffic = mixed_requests(srv.url)
        for name in ("fit", "families", "healthz"):
            assert name in traffic
        warm = run_load(srv, traffic, seconds=3.0, connections=8)  # lazy imports, caches
        assert warm.count(lambda s: s >= 500) == 0 and not warm.failures, warm.statuses
        assert set(warm.by_name) == set(traffic)
        for name, statuses in warm.by_name.items():
            assert set(statuses) == {200}, (name, statuses)  # the mix itself is valid input

        workers = srv.workers()
        result = run_load(srv, traffic, seconds=SECONDS, connections=8)

    total = sum(result.statuses.values())
    fivexx = result.count(lambda s: s >= 500)
    print(f"\n{total} requests in {result.duration:.1f} s ({total / result.duration:.0f}/s) "
          f"over {sorted(traffic)}; statuses {dict(result.statuses)}; "
          f"{len(result.failures)} connection failures")
    for name in sorted(result.by_name):
        lat = [t for _, n, t in result.latencies if n == name]
        print(f"  {name:9s} n={len(lat):6d} p50={percentile(lat, 50) * 1000:7.1f} ms "
              f"p99={percentile(lat, 99) * 1000:7.1f} ms")
    growth = {}
    for pid in workers:
        samples = result.rss.get(pid, [])
        first = [v for t, v in samples if t < WINDOW]
        last = [v for t, v in samples if t >= result.duration - WINDOW]
        assert len(first) >= 5 and len(last) >= 5, f"worker {pid} was not sampled throughout"
        growth[pid] = float(np.mean(last) / np.mean(first) - 1.0)
        print(f"  worker {pid}: RSS {np.mean(first) / 2**20:.1f} MiB (first 10 s) -> "
              f"{np.mean(last) / 2**20:.1f} MiB (last 10 s), growth {growth[pid] * 100:+.2f}%")
    assert fivexx == 0, result.statuses
    assert not result.failures, result.failures[:5]
    assert set(result.by_name) == set(traffic)
    assert all(g < 0.10 for g in growth.values()), growth
    assert len(growth) == 2
