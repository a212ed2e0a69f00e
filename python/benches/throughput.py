"""Throughput of the Python package (a benchmark, not a test; timings move with the load of
a shared machine: compare figures from one sitting).

    python python/benches/throughput.py push [ROWS]          # Monitor.push_batch from Arrow arrays
    python python/benches/throughput.py spark [ROWS_PER_CHANNEL] [CHANNELS]
                                                             # Spark local[2] vs fleet --jobs 2
    python python/benches/throughput.py overhead [GROUPS]    # Spark's cost per channel (10-row channels)
    python python/benches/throughput.py parquet [ROWS]       # replay of a Parquet file: time, peak RSS

Feeds are simulated from simulated-feeds/gas-cell.toml (half checks, half readings) with
the repository's `steadycal simulate`, in a temporary directory.
"""

from __future__ import annotations

import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pyarrow as pa
import pyarrow.csv as pa_csv
import pyarrow.parquet as pq

import steadycal

ROOT = Path(__file__).resolve().parents[2]
CLI = Path(os.environ.get("STEADYCAL_BIN", ROOT / "target" / "release" / "steadycal"))
SCENARIO = ROOT / "simulated-feeds" / "gas-cell.toml"


def simulate(rows: int, out: Path) -> Path:
    subprocess.run([str(CLI), "simulate", str(SCENARIO), "--rows", str(rows), "--out", str(out)], check=True)
    return out


def read(path: Path) -> pa.Table:
    return pa_csv.read_csv(path, convert_options=pa_csv.ConvertOptions(null_values=[""]))


def best_of(runs: int, work) -> float:
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        work()
        times.append(time.perf_counter() - start)
    return min(times)


def push(rows: int) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        table = read(simulate(rows, Path(tmp) / "feed.csv"))
    for precision in ("f32", "f64"):
        cpu = []
        seconds = best_of(3, lambda: cpu.append(cpu_of(lambda: steadycal.Monitor(precision=precision).push_batch(table))))
        print(
            f"push_batch {precision}: {rows} rows in {seconds:.3f} s wall = {rows / seconds / 1e6:.2f} M samples/s; "
            f"{min(cpu):.3f} s CPU = {rows / min(cpu) / 1e6:.2f} M samples/s (best of 3; load average {os.getloadavg()[0]:.1f})"
        )


def cpu_of(work) -> float:
    start = time.process_time()
    work()
    return time.process_time() - start


def session():
    from pyspark.sql import SparkSession

    # The workers run this interpreter (the one steadycal is installed in).
    os.environ.setdefault("PYSPARK_PYTHON", sys.executable)

    spark = (
        SparkSession.builder.master("local[2]")
        .config("spark.ui.enabled", "false")
        .config("spark.sql.shuffle.partitions", "2")
        .config("spark.driver.memory", "4g")
        .getOrCreate()
    )
    spark.sparkContext.setLogLevel("ERROR")
    return spark


def spark_vs_fleet(rows: int, channels: int) -> None:
    from steadycal import spark as sc_spark

    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        feed = simulate(rows, tmp / "one.csv")
        fleet_dir = tmp / "fleet"
        fleet_dir.mkdir()
        table = read(feed)
        parquet_dir = tmp / "parquet"
        parquet_dir.mkdir()
        for i in range(channels):
            shutil.copy(feed, fleet_dir / f"ch{i:02d}.csv")
            pq.write_table(table.append_column("channel", pa.array([f"ch{i:02d}"] * table.num_rows)), parquet_dir / f"ch{i:02d}.parquet")
        total = rows * channels
        seconds = best_of(3, lambda: subprocess.run([str(CLI), "fleet", str(fleet_dir), "--jobs", "2", "--quiet"], check=True))
        print(f"fleet --jobs 2: {channels} channels x {rows} rows in {seconds:.2f} s = {total / seconds / 1e6:.2f} M samples/s (best of 3)")
        spark = session()
        df = spark.read.parquet(str(parquet_dir))
        for method in ("partition", "group"):
            result = lambda: sc_spark.replay_channels(df, channel="channel", method=method).collect()
            result()  # warm-up: Python workers, JIT
            seconds = best_of(3, result)
            print(f"spark local[2] {method}: {channels} channels x {rows} rows in {seconds:.2f} s = {total / seconds / 1e6:.2f} M samples/s (best of 3, reading Parquet)")
        spark.stop()


def overhead(groups: int) -> None:
    from steadycal import spark as sc_spark

    spark = session()
    rows = [(f"g{g:05d}", float(t), 10.0 + t, 10.0 + t if t % 2 == 0 else None) for g in range(groups) for t in range(10)]
    df = spark.createDataFrame(rows, "channel string, t double, raw double, ref double").cache()
    df.count()
    for method in ("partition", "group"):
        result = lambda: sc_spark.replay_channels(df, channel="channel", method=method).collect()
        result()
        seconds = best_of(3, result)
        print(f"spark local[2] {method}: {groups} channels of 10 rows in {seconds:.2f} s = {seconds / groups * 1e3:.2f} ms per channel (2 cores; best of 3)")
    spark.stop()


def parquet(rows: int) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        table = read(simulate(rows, tmp / "feed.csv"))
        pq.write_table(table, tmp / "feed.parquet")
        del table
        size = (tmp / "feed.parquet").stat().st_size
        start = time.perf_counter()
        subprocess.run([str(CLI), "replay", str(tmp / "feed.parquet"), "--events", str(tmp / "e.jsonl"), "--quiet"], check=True)
        seconds = time.perf_counter() - start
        peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
        print(f"replay {rows} rows of Parquet ({size / 2**20:.0f} MiB): {seconds:.2f} s = {rows / seconds / 1e6:.2f} M rows/s, peak RSS {peak:.1f} MiB")


if __name__ == "__main__":
    what = sys.argv[1] if len(sys.argv) > 1 else "push"
    numbers = [int(float(a)) for a in sys.argv[2:]]
    if what == "push":
        push(*(numbers or [10_000_000]))
    elif what == "spark":
        spark_vs_fleet(*(numbers or [250_000, 16]))
    elif what == "overhead":
        overhead(*(numbers or [2000]))
    elif what == "parquet":
        parquet(*(numbers or [10_000_000]))
    else:
        sys.exit(__doc__)
