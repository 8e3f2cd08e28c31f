"""Batch fitting at pipeline scale: ratios measured side by side in one run.

Workload (issue 4): n = 50 points per series, degree selected over 1..4 by
sequential F (the default method) with the compact summary (coefficients and
standard errors, sigma, R², criterion values, residual tests and trust flags).
x is sorted within each series, as in time- or dose-ordered pipeline data.

Printed:
  * engine rate at G = 100,000 (1 and 2 threads), series/s;
  * statsmodels loop doing the same selection (OLS per candidate, sequential F
    from the last coefficient's t test) — timed on a subset and extrapolated
    per series, as said in its line; likewise a numpy.polyfit loop;
  * ragged lengths 20..80 vs regular 50 at G = 100,000;
  * per-series time at G = 100,000 vs G = 10,000;
  * peak traced memory (tracemalloc) of the streaming path at G = 10,000 and
    100,000, and of the in-memory path per series;
  * /v1/batch with 10,000 series through gunicorn on 127.0.0.1 vs the
    in-process engine rate (JSON decoding, validation and encoding included).

CPU time is printed beside wall time: the machine may be shared, and CPU time
is the steadier of the two. Usage: python benchmarks/bench_batch.py [--quick]
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np
from scipy import special

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from service.core import ModelSpec  # noqa: E402
from service.core.batch.driver import fit_chunks, fit_many  # noqa: E402

MODEL = ModelSpec(max_degree=4, select="sequential_f")
ALPHA = MODEL.alpha
QUICK = "--quick" in sys.argv


def data(G: int, n: int | None = 50, seed: int = 1, lo: int = 20, hi: int = 80):
    """Seeded flat arrays: quadratic trend plus noise, x sorted within each series."""
    rng = np.random.default_rng(seed)
    lengths = np.full(G, n) if n else rng.integers(lo, hi + 1, G)
    starts = np.repeat(np.arange(G) * 10.0, lengths)  # distinct offset per series
    x = rng.uniform(0.0, 10.0, int(lengths.sum()))
    order = np.lexsort((x, np.repeat(np.arange(G), lengths)))
    x = x[order]
    y = 1.0 + 2.0 * x - 0.1 * x * x + rng.normal(0.0, 1.0, x.size) + 0 * starts
    return x, y, lengths


def timed(func, repeat=1):
    best_wall, best_cpu, out = np.inf, np.inf, None
    for _ in range(repeat):
        w0, c0 = time.perf_counter(), time.process_time()
        out = func()
        best_wall = min(best_wall, time.perf_counter() - w0)
        best_cpu = min(best_cpu, time.process_time() - c0)
    return best_wall, best_cpu, out


def engine_rate(G, n=50, workers=1, repeat=2):
    x, y, lengths = data(G, n)
    wall, cpu, res = timed(lambda: fit_many(x, y, lengths, model=MODEL, workers=workers), repeat)
    assert res.n_ok == G
    return G / wall, G / cpu


def statsmodels_loop(count: int) -> float:
    import statsmodels.api as sm

    x, y, lengths = data(count)
    xs, ys = x.reshape(count, -1), y.reshape(count, -1)
    t0, c0 = time.perf_counter(), time.process_time()
    for g in range(count):
        chosen = 1
        for d in range(1, 5):
            res = sm.OLS(ys[g], np.vander(xs[g], d + 1, increasing=True)).fit()
            if d > 1:
                if not res.pvalues[-1] < ALPHA:  # sequential F (1 df) = t test of the last
                    break
                chosen = d
        _ = chosen, res.bse, res.rsquared
    return count / (time.perf_counter() - t0), count / (time.process_time() - c0)


def polyfit_loop(count: int) -> float:
    x, y, lengths = data(count)
    xs, ys = x.reshape(count, -1), y.reshape(count, -1)
    n = xs.shape[1]
    t0, c0 = time.perf_counter(), time.process_time()
    for g in range(count):
        rss = {}
        chosen = 1
        for d in range(1, 5):
            coef, resid, *_ = np.polyfit(xs[g], ys[g], d, full=True)
            rss[d] = float(resid[0])
            if d > 1:
                f = (rss[d - 1] - rss[d]) / (rss[d] / (n - d - 1))
                if not special.fdtrc(1, n - d - 1, f) < ALPHA:
                    break
                chosen = d
        _ = chosen, coef
    return count / (time.perf_counter() - t0), count / (time.process_time() - c0)


def known_sd_rates(G: int, singles: int) -> str:
    """Known measurement SDs (weighting "known_sd") in the kernel vs relative weights on the
    same weighted series, and vs the single fit per series (the path the kernel spares)."""
    from service.core import FitOptions, fit_series

    x, y, lengths = data(G, seed=4)
    w = np.random.default_rng(4).uniform(0.5, 2.0, x.size)
    known, grid_free = FitOptions(weighting="known_sd"), FitOptions(weighting="known_sd",
                                                                   grid=None)
    rel_wall, rel_cpu, _ = timed(lambda: fit_many(x, y, lengths, w, model=MODEL), 2)
    k_wall, k_cpu, res = timed(lambda: fit_many(x, y, lengths, w, model=MODEL, options=known),
                               2)
    assert res.n_ok == G and not res.reports
    xs, ys, ws = (a.reshape(G, -1) for a in (x, y, w))
    one_wall, one_cpu, _ = timed(lambda: [fit_series(xs[g], ys[g], ws[g], model=MODEL,
                                                     options=grid_free)
                                          for g in range(singles)])
    return (f"known_sd G={G}: {G / k_wall:,.0f} series/s vs relative weights {G / rel_wall:,.0f}"
            f" -> known/relative time = {k_wall / rel_wall:.2f} wall, {k_cpu / rel_cpu:.2f} CPU "
            f"(target ~1); single fit per series (timed on {singles}): "
            f"{singles / one_wall:,.0f} series/s -> kernel/single = "
            f"{(G / k_cpu) / (singles / one_cpu):,.0f}x CPU")


def streaming_peak(G: int) -> int:
    rng = np.random.default_rng(3)

    def series():
        for _ in range(G):
            x = np.sort(rng.uniform(0.0, 10.0, 50))
            yield x, 1.0 + x + rng.normal(0.0, 1.0, 50)

    tracemalloc.start()
    count = 0
    for _, res in fit_chunks(series(), chunk_series=4096, model=MODEL):
        count += len(res)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert count == G
    return peak


def in_memory_peak_per_series(G: int) -> float:
    x, y, lengths = data(G)
    tracemalloc.start()
    fit_many(x, y, lengths, model=MODEL)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak / G


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _worker_cpu(master: int) -> float:
    """CPU seconds used so far by the gunicorn workers of ``master`` (Linux /proc)."""
    total = 0.0
    tick = os.sysconf("SC_CLK_TCK")
    for task in Path(f"/proc/{master}/task").iterdir():
        for child in (task / "children").read_text().split():
            fields = Path(f"/proc/{child}/stat").read_text().rsplit(")", 1)[1].split()
            total += (int(fields[11]) + int(fields[12])) / tick   # utime + stime
    return total


def http_rate(G: int):
    import httpx
    import orjson

    x, y, lengths = data(G, seed=5)
    xs, ys = x.reshape(G, -1), y.reshape(G, -1)
    body = orjson.dumps({"series": [{"id": i, "x": xs[i].tolist(), "y": ys[i].tolist()}
                                    for i in range(G)],
                         "model": {"max_degree": 4, "select": "sequential_f"}})
    port = _free_port()
    env = dict(os.environ, CURVEWISE_LOG_LEVEL="warning")
    server = subprocess.Popen([str(ROOT / ".venv/bin/curvewise"), "serve", "--host",
                               "127.0.0.1", "--port", str(port), "--workers", "1"],
                              env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        url = f"http://127.0.0.1:{port}"
        deadline = time.time() + 30
        while time.time() < deadline:
            try:
                if httpx.get(url + "/healthz", timeout=1).status_code == 200:
                    break
            except httpx.HTTPError:
                time.sleep(0.2)
        with httpx.Client(timeout=120) as client:
            best, best_cpu = np.inf, np.inf
            for _ in range(3):  # JSON body
                t0, c0 = time.perf_counter(), _worker_cpu(server.pid)
                answer = client.post(url + "/v1/batch", content=body,
                                     headers={"Content-Type": "application/json"})
                best = min(best, time.perf_counter() - t0)
                best_cpu = min(best_cpu, _worker_cpu(server.pid) - c0)
                assert answer.status_code == 200, answer.text[:300]
                assert orjson.loads(answer.content)["summary"]["ok"] == G
            lines = b"".join(orjson.dumps({"id": i, "x": xs[i].tolist(), "y": ys[i].tolist()})
                             + b"\n" for i in range(G))
            best_nd = np.inf
            for _ in range(3):
                t0 = time.perf_counter()
                answer = client.post(url + "/v1/batch", content=lines,
                                     headers={"Content-Type": "application/x-ndjson"})
                best_nd = min(best_nd, time.perf_counter() - t0)
                assert answer.status_code == 200
                assert orjson.loads(answer.content.splitlines()[-1])["summary"]["ok"] == G
        return G / best, len(body) / 1e6, G / best_nd, G / max(best_cpu, 1e-9)
    finally:
        server.terminate()
        server.wait(timeout=30)


def main() -> None:
    big = 20_000 if QUICK else 100_000
    print(f"batch benchmark: n = 50, select 1..4 by sequential_f, summary detail, "
          f"{os.cpu_count()} CPUs")
    r1, c1 = engine_rate(big, workers=1)
    r2, c2 = engine_rate(big, workers=2)
    rate = max(r1, r2)
    print(f"engine G={big}: {r1:,.0f} series/s (1 thread; {c1:,.0f}/CPU-s), "
          f"{r2:,.0f} series/s (2 threads)   target >= 500,000: {rate / 5e5:.2f}x of target")
    n_sm, n_pf = (150, 1000) if QUICK else (400, 4000)
    sm_rate, sm_cpu = statsmodels_loop(n_sm)
    print(f"statsmodels loop (timed on {n_sm} series, extrapolated per series): "
          f"{sm_rate:,.0f} series/s ({sm_cpu:,.0f}/CPU-s) -> engine/statsmodels = "
          f"{rate / sm_rate:,.0f}x wall, {c1 / sm_cpu:,.0f}x CPU, 1 thread (target >= 200x)")
    pf_rate, pf_cpu = polyfit_loop(n_pf)
    print(f"numpy.polyfit loop (timed on {n_pf} series, extrapolated): {pf_rate:,.0f} "
          f"series/s ({pf_cpu:,.0f}/CPU-s) -> engine/polyfit = {rate / pf_rate:,.1f}x wall, "
          f"{c1 / pf_cpu:,.1f}x CPU, 1 thread (target >= 40x)")
    x, y, lengths = data(big, None)
    wall, cpu, _ = timed(lambda: fit_many(x, y, lengths, model=MODEL, workers=1), 2)
    ragged, ragged_cpu = big / wall, big / cpu
    print(f"ragged 20..80 (mean 50): {ragged:,.0f} series/s vs regular {r1:,.0f} (1 thread) "
          f"-> ragged/regular time = {r1 / ragged:.2f} wall, {c1 / ragged_cpu:.2f} CPU "
          "(target <= 1.3)")
    print(known_sd_rates(big // 5, 300 if QUICK else 1000))
    xb, yb, lb = data(big)
    xs, ys, ls = data(big // 10)
    per_big, per_small = [], []
    for _ in range(3):   # interleaved, so both sizes see the same machine conditions
        _, cpu, _ = timed(lambda: fit_many(xb, yb, lb, model=MODEL))
        per_big.append(cpu / big)
        _, cpu, _ = timed(lambda: [fit_many(xs, ys, ls, model=MODEL) for _ in range(10)])
        per_small.append(cpu / big)
    print(f"per-series CPU time G={big} vs G={big // 10} (interleaved, best of 3): "
          f"{min(per_big) * 1e6:.2f} us vs {min(per_small) * 1e6:.2f} us -> "
          f"{min(per_big) / min(per_small):.2f} (target <= 1.0, i.e. no slower per series)")
    p_small, p_big = streaming_peak(big // 10), streaming_peak(big)
    print(f"streaming (fit_chunks, 4096 per chunk) peak traced memory: G={big // 10}: "
          f"{p_small / 1e6:.1f} MB, G={big}: {p_big / 1e6:.1f} MB -> ratio "
          f"{p_big / p_small:.2f} (flat: ~1)")
    m_small, m_big = in_memory_peak_per_series(big // 10), in_memory_peak_per_series(big)
    print(f"in-memory fit_many peak per series: {m_small:,.0f} B at G={big // 10}, "
          f"{m_big:,.0f} B at G={big} (the columnar result itself is O(G))")
    g_http = 2_000 if QUICK else 10_000
    engine_small, engine_small_cpu = engine_rate(g_http, workers=1, repeat=3)
    h_rate, mb, nd_rate, h_cpu = http_rate(g_http)
    print(f"HTTP /v1/batch, {g_http} series ({mb:.1f} MB JSON), 1 gunicorn worker on "
          f"127.0.0.1: {h_rate:,.0f} series/s vs in-process {engine_small:,.0f} -> "
          f"{h_rate / engine_small:.2f}x (target >= 0.5x); NDJSON stream of the same series: "
          f"{nd_rate:,.0f} series/s -> {nd_rate / engine_small:.2f}x")
    print(f"HTTP /v1/batch by CPU time: the worker spends {1e6 / h_cpu:.1f} us of CPU per series "
          f"(request decoding, validation, fit, encoding) vs {1e6 / engine_small_cpu:.1f} us "
          f"in-process -> {h_cpu / engine_small_cpu:.2f}x (CPU time is read from /proc in "
          "clock ticks of 10 ms)")


if __name__ == "__main__":
    main()
