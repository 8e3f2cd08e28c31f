"""Arrow bodies of /v1/batch end to end: ratios measured side by side in one run.

Workload (issue 17): 10,000 polynomial series of 50 points, degree chosen from 1..4 by
sequential F (``{"max_degree": 4}``), held as a long pandas DataFrame (one row per
point: id, x, y). Printed:

  * the in-process engine (``fit_many`` on flat arrays, 1 thread) and ``fit_frame`` on
    the DataFrame, series/s;
  * ``Client.batch_frame(df)`` against a real gunicorn server (1 sync worker on
    127.0.0.1): the client encodes the frame as Arrow, the server answers a tidy Arrow
    table, the client decodes it into a DataFrame — all inside the timing;
  * the JSON body of the same job through the same client: ``frames.fit_long_frame``
    (DataFrame in, DataFrame out) and ``client.batch`` of ready-made series lists; and,
    for reference, a JSON body pre-encoded by orjson, posted by httpx and its answer
    decoded by orjson (no client, no DataFrame: the floor of any JSON client);
  * ratios: Arrow / engine (target >= 0.5x) and Arrow / JSON (target >= 10x);
  * peak RSS of streaming 100k, 300k and 1M series (50 points each) as an Arrow IPC
    stream through ``fit_arrow_stream`` (chunks of 8,192 series, the ``fit_frame`` engine
    and columns), each in a fresh process: flat in the number of series.

The methods run interleaved, round after round, and the best round of each counts, so
they see the same machine conditions. CPU time of the gunicorn worker (read from /proc)
is printed beside wall time: the machine may be shared.
Usage: python benchmarks/bench_arrow.py [--quick] [--no-memory]
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
import threading
import time
import urllib.request
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parent.parent
sys.path[:0] = [str(ROOT), str(ROOT / "client")]

from curvewise_client import Client, frames  # noqa: E402

from service.core import ModelSpec  # noqa: E402
from service.core.batch.driver import fit_many  # noqa: E402
from service.core.batch.frames import fit_frame  # noqa: E402

MODEL = {"max_degree": 4}
SPEC = ModelSpec(max_degree=4)
QUICK = "--quick" in sys.argv
N_POINTS = 50


def long_frame(G: int, seed: int = 7) -> pd.DataFrame:
    """Seeded long data: per series a polynomial of degree 1..4 plus noise, x sorted."""
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(0.0, 10.0, (G, N_POINTS)), axis=1)
    degree = rng.integers(1, 5, G)[:, None]
    u = x / 10.0
    y = 1.0 + 2.0 * u + sum(np.where(degree >= k, 3.0 * u ** k, 0.0) for k in (2, 3, 4))
    y = y + rng.normal(0.0, 0.05, x.shape)
    ids = np.repeat(np.array([f"s{i:06d}" for i in range(G)]), N_POINTS)
    return pd.DataFrame({"id": ids, "x": x.ravel(), "y": y.ravel()})


def _worker_cpu(master: int) -> float:
    """CPU seconds used so far by the children of ``master`` (Linux /proc)."""
    total, tick = 0.0, os.sysconf("SC_CLK_TCK")
    for task in Path(f"/proc/{master}/task").iterdir():
        for child in (task / "children").read_text().split():
            fields = Path(f"/proc/{child}/stat").read_text().rsplit(")", 1)[1].split()
            total += (int(fields[11]) + int(fields[12])) / tick
    return total


def _server(port: int) -> subprocess.Popen:
    env = dict(os.environ, CURVEWISE_LOG_LEVEL="warning", PYTHONPATH=str(ROOT))
    process = subprocess.Popen(
        [sys.executable, "-m", "service.cli", "serve", "--host", "127.0.0.1",
         "--port", str(port), "--workers", "1"], cwd=ROOT, env=env,
        stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    deadline = time.time() + 300   # the first start may compile the kernels
    while time.time() < deadline:
        try:
            with urllib.request.urlopen(f"http://127.0.0.1:{port}/readyz", timeout=2) as r:
                if r.status == 200:
                    return process
        except OSError:
            time.sleep(0.3)
    process.terminate()
    raise RuntimeError("the server did not become ready")


def _timed(func):
    w0, c0 = time.perf_counter(), time.process_time()
    out = func()
    return time.perf_counter() - w0, time.process_time() - c0, out


def throughput(G: int, rounds: int) -> None:
    frame = long_frame(G)
    x, y = frame["x"].to_numpy(), frame["y"].to_numpy()
    lengths = np.full(G, N_POINTS)
    series = frames.series_from_long_frame(frame)
    fit_many(x, y, lengths, model=SPEC)   # compiled kernels loaded
    import socket

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    server = _server(port)
    client = Client(f"http://127.0.0.1:{port}", timeout=600)
    import httpx
    import orjson

    raw_body = orjson.dumps({"series": [{"id": s["id"], "x": s["x"], "y": s["y"]}
                                        for s in series], "model": MODEL})
    best = {k: np.inf for k in ("engine", "frame", "arrow", "json_frame", "json_list",
                                "json_raw")}
    cpu = {"engine": 0.0, "arrow_worker": 0.0, "arrow_client": 0.0}   # summed over rounds
    try:
        out = client.batch_frame(frame, model=MODEL)   # warm-up, and a check
        assert len(out) == G and (out["status"] == "ok").all(), out["status"].value_counts()
        print(f"  degrees chosen: {out['degree'].value_counts().sort_index().to_dict()}")
        for _ in range(rounds):
            wall, c, res = _timed(lambda: fit_many(x, y, lengths, model=SPEC))
            assert res.n_ok == G
            best["engine"] = min(best["engine"], wall)
            cpu["engine"] += c
            wall, _, _ = _timed(lambda: fit_frame(frame, model=SPEC))
            best["frame"] = min(best["frame"], wall)
            w0 = _worker_cpu(server.pid)
            wall, c, out = _timed(lambda: client.batch_frame(frame, model=MODEL))
            assert len(out) == G
            best["arrow"] = min(best["arrow"], wall)
            cpu["arrow_worker"] += _worker_cpu(server.pid) - w0
            cpu["arrow_client"] += c
            wall, _, out = _timed(lambda: frames.fit_long_frame(client, frame, model=MODEL))
            assert len(out) == G
            best["json_frame"] = min(best["json_frame"], wall)
            wall, _, res = _timed(lambda: client.batch(series, model=MODEL))
            assert res.summary["ok"] == G
            best["json_list"] = min(best["json_list"], wall)
            wall, _, res = _timed(lambda: orjson.loads(httpx.post(
                f"http://127.0.0.1:{port}/v1/batch", content=raw_body, timeout=600,
                headers={"Content-Type": "application/json"}).content))
            assert res["summary"]["ok"] == G
            best["json_raw"] = min(best["json_raw"], wall)
    finally:
        server.terminate()
        server.wait(timeout=30)
    rate = {k: G / v for k, v in best.items()}
    cpu = {k: v / rounds for k, v in cpu.items()}   # mean CPU seconds per round
    print(f"in-process engine (fit_many, flat arrays, 1 thread): {rate['engine']:,.0f} series/s "
          f"({cpu['engine'] / G * 1e6:.1f} us CPU per series)")
    print(f"in-process fit_frame (DataFrame in, tidy DataFrame out): {rate['frame']:,.0f} series/s")
    print(f"Arrow /v1/batch via Client.batch_frame (1 gunicorn worker, encode + HTTP + fit + "
          f"decode): {rate['arrow']:,.0f} series/s; worker {cpu['arrow_worker'] / G * 1e6:.1f} "
          f"us CPU per series, client {cpu['arrow_client'] / G * 1e6:.1f} us")
    print(f"JSON /v1/batch via frames.fit_long_frame (DataFrame in and out): "
          f"{rate['json_frame']:,.0f} series/s; via client.batch of ready series lists: "
          f"{rate['json_list']:,.0f} series/s; body pre-encoded by orjson, posted by httpx, "
          f"answer decoded by orjson (no client, no DataFrame): {rate['json_raw']:,.0f} "
          "series/s")
    print(f"RATIO Arrow / in-process engine: {rate['arrow'] / rate['engine']:.2f}x wall "
          f"(target >= 0.5x); Arrow / fit_frame: {rate['arrow'] / rate['frame']:.2f}x")
    both = cpu["arrow_worker"] + cpu["arrow_client"]
    print(f"RATIO by CPU time (steadier on a shared machine): the engine's CPU per series / "
          f"(worker + client CPU per series) = {cpu['engine'] / both:.2f}x (CPU time of the "
          f"worker is read in clock ticks of 10 ms; means over the {rounds} rounds)")
    print(f"RATIO Arrow / JSON: {rate['arrow'] / rate['json_frame']:.1f}x DataFrame to "
          f"DataFrame (target >= 10x); {rate['arrow'] / rate['json_list']:.1f}x vs client.batch "
          f"of ready lists; {rate['arrow'] / rate['json_raw']:.1f}x vs the pre-encoded JSON "
          "body")
    print(f"  (best of {rounds} interleaved rounds, G = {G}, {N_POINTS} points per series, "
          f"{os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.1f})")


def memory_child(G: int) -> None:
    """Stream G series through an OS pipe as an Arrow IPC stream; print RSS figures."""
    import pyarrow as pa

    from service.core.batch.arrow_stream import fit_arrow_stream

    fit_many(*long_frame(50)[["x", "y"]].to_numpy().T, np.full(50, N_POINTS), model=SPEC)
    before = _rss_kb("VmRSS")
    Path("/proc/self/clear_refs").write_text("5")   # reset the peak (VmHWM) to the current RSS
    schema = pa.schema([("id", pa.int64()), ("x", pa.float64()), ("y", pa.float64())])
    read_fd, write_fd = os.pipe()

    def produce():
        rng = np.random.default_rng(11)
        per = 2_000
        with open(write_fd, "wb") as sink, pa.ipc.new_stream(sink, schema) as writer:
            for start in range(0, G, per):
                count = min(per, G - start)
                x = np.sort(rng.uniform(0.0, 10.0, (count, N_POINTS)), axis=1).ravel()
                y = 1.0 + 0.5 * x - 0.02 * x * x + rng.normal(0.0, 0.3, x.size)
                ids = np.repeat(np.arange(start, start + count), N_POINTS)
                writer.write_batch(pa.record_batch([ids, x, y], schema=schema))

    producer = threading.Thread(target=produce, daemon=True)
    producer.start()
    rows = ok = 0
    t0 = time.perf_counter()
    with open(read_fd, "rb") as source:
        for table in fit_arrow_stream(pa.ipc.open_stream(source), model=SPEC):
            rows += table.num_rows
            ok += table.column("status").to_pylist().count("ok")
    wall = time.perf_counter() - t0
    producer.join()
    peak = _rss_kb("VmHWM")
    print(f"{G} {rows} {ok} {before} {peak} {wall:.2f}")


def _rss_kb(field: str) -> int:
    """``VmRSS`` (now) or ``VmHWM`` (peak since the last reset) of this process, in kB."""
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith(field + ":"):
            return int(line.split()[1])
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss


def memory(sizes) -> None:
    print("streaming an Arrow IPC stream (OS pipe, 2,000 series per record batch) through "
          "fit_arrow_stream, 8,192 series per chunk, each size in a fresh process:")
    peaks = []
    for G in sizes:
        out = subprocess.run([sys.executable, __file__, "--memory-child", str(G)],
                             capture_output=True, text=True, check=True, cwd=ROOT)
        g, rows, ok, before, peak, wall = out.stdout.split()[-6:]
        assert int(rows) == G, out.stdout
        peaks.append(int(peak))
        print(f"  {G:>9,} series: peak RSS while streaming {int(peak) / 1024:,.0f} MB (RSS "
              f"before, after imports and warm-up: {int(before) / 1024:,.0f} MB; growth "
              f"{(int(peak) - int(before)) / 1024:,.0f} MB), {int(ok):,} ok, "
              f"{G / float(wall):,.0f} series/s")
    print(f"RATIO peak RSS {sizes[-1]:,} / {sizes[0]:,} series: {peaks[-1] / peaks[0]:.2f} "
          "(flat: ~1)")


def main() -> None:
    if "--memory-child" in sys.argv:
        memory_child(int(sys.argv[sys.argv.index("--memory-child") + 1]))
        return
    G = 2_000 if QUICK else 10_000
    print(f"Arrow batch benchmark: {G:,} series x {N_POINTS} points, model {MODEL}")
    throughput(G, rounds=3 if QUICK else 7)
    if "--no-memory" not in sys.argv:
        memory((20_000, 60_000, 200_000) if QUICK else (100_000, 300_000, 1_000_000))


if __name__ == "__main__":
    main()
