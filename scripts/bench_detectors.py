"""Benchmark: detector readings ingest + review against a duckdb floor.

Generates 48 channels x 365 days x one reading a minute (about 25 million rows) as one long
form Parquet file (time, channel, ppm), deterministic from a seed, then times in separate
child processes (so each phase's peak memory is its own):

* floor-channel: duckdb reads the same file with one GROUP BY query per channel (hourly count,
  mean and max of that channel: the least work that touches every reading of a channel the
  way a review does). The file is sorted by channel, so duckdb can skip other channels' row
  groups: this is the strict form of the floor.
* floor-single: one duckdb query over the file grouped by channel (count, mean, max), for
  reference: the bare cost of reading every value once.
* ours: ``ReadingStore.ingest`` of the file into a fresh store (validate, sort, de-duplicate,
  partition, write Parquet), then for every channel ``ReadingStore.load`` and
  ``review_channel`` (with every other channel's hourly means, for related channels).

Usage::

    .venv/bin/python scripts/bench_detectors.py --scale 0.05
    .venv/bin/python scripts/bench_detectors.py --json          # full size, ~25 M rows

The goal is ours <= 2x floor-channel and peak memory < 4 GB.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CHANNELS = 48
DAYS = 365
SEED = 20250101
START = "2025-01-01T00:00:00"


def _peak_rss_mb() -> float:
    # ru_maxrss is in kilobytes on Linux (bytes on macOS).
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return rss / (1024 * 1024) if sys.platform == "darwin" else rss / 1024


def generate(path: Path, days: int, channels: int = CHANNELS) -> int:
    """Write the synthetic readings file; returns the row count. Deterministic."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    n = days * 1440
    start_us = int(np.datetime64(START, "us").astype(np.int64))
    t_us = start_us + np.arange(n, dtype=np.int64) * 60_000_000
    minute = np.arange(n)
    tod_h = (minute % 1440) / 60.0
    schema = pa.schema(
        [
            ("time", pa.timestamp("us", tz="UTC")),
            ("channel", pa.dictionary(pa.int8(), pa.string())),
            ("ppm", pa.float64()),
        ]
    )
    time_arr = pa.array(t_us, type=pa.timestamp("us", tz="UTC"))
    with pq.ParquetWriter(path, schema, compression="zstd") as writer:
        for c in range(channels):
            rng = np.random.default_rng(SEED + c)
            ppm = 3.0 + (c % 5) + rng.normal(0.0, 0.8, n)
            kind = c % 4
            if kind == 1:  # a defrost-like release every 6 h, 20 minutes long
                ppm += 40.0 * ((minute % 360) < 20)
            elif kind == 2:  # a night build-up that grows through the year
                night = (tod_h >= 22) | (tod_h < 6)
                ppm += night * (10.0 + 60.0 * minute / n)
            elif kind == 3:  # a few multi-hour episodes at random times
                for _ in range(12):
                    s = int(rng.integers(0, max(1, n - 600)))
                    width = int(rng.integers(60, 600))
                    ppm[s : s + width] += rng.uniform(30.0, 500.0)
            ppm = np.round(np.clip(ppm, 0.0, None), 1)
            name = f"CH{c + 1:02d}"
            channel = pa.DictionaryArray.from_arrays(
                pa.array(np.zeros(n, dtype=np.int8)), pa.array([name])
            )
            table = pa.Table.from_arrays([time_arr, channel, pa.array(ppm)], schema=schema)
            writer.write_table(table, row_group_size=min(n, 1 << 20))
    return n * channels


def phase_floor_channel(path: Path) -> dict:
    import duckdb

    t0 = time.perf_counter()
    con = duckdb.connect()
    con.execute("SET TimeZone = 'UTC'")
    names = [
        r[0]
        for r in con.execute(
            "SELECT DISTINCT channel FROM read_parquet(?) ORDER BY 1", [str(path)]
        ).fetchall()
    ]
    rows = 0
    for name in names:
        res = con.execute(
            "SELECT date_trunc('hour', time) AS h, count(*) AS n, avg(ppm), max(ppm) "
            "FROM read_parquet(?) WHERE channel = ? GROUP BY h",
            [str(path), name],
        ).fetchnumpy()
        rows += int(res["n"].sum())
    return {"seconds": time.perf_counter() - t0, "rows": rows, "peak_rss_mb": _peak_rss_mb()}


def phase_floor_single(path: Path) -> dict:
    import duckdb

    t0 = time.perf_counter()
    con = duckdb.connect()
    res = con.execute(
        "SELECT channel, count(*) AS n, avg(ppm), max(ppm) FROM read_parquet(?) GROUP BY channel",
        [str(path)],
    ).fetchnumpy()
    rows = int(res["n"].sum())
    return {"seconds": time.perf_counter() - t0, "rows": rows, "peak_rss_mb": _peak_rss_mb()}


def phase_ours(path: Path, store_root: Path) -> dict:
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from ledger.domain.detector import ChannelConfig, review_channel
    from ledger.store.readings import ReadingStore

    t0 = time.perf_counter()
    store = ReadingStore(store_root)
    summary = store.ingest(path, "BENCH")
    t_ingest = time.perf_counter() - t0
    # Pass 1: hourly means of every channel (duckdb inside the store), for related channels.
    channels = store.channels("BENCH")
    hourly = store.hourly_means("BENCH")
    t_load = time.perf_counter() - t0 - t_ingest
    # Pass 2: one channel at a time, so memory stays at one channel's readings.
    episodes = cycles = related = 0
    for ch in channels:
        review = review_channel(
            store.load("BENCH", ch),
            ChannelConfig(ch, timezone="Europe/Berlin"),
            defrost_every_hours=6.0,
            repairs=(),
            other_channels={k: v for k, v in hourly.items() if k != ch},
        )
        episodes += len(review.episodes)
        cycles += review.cycle_hours is not None
        related += len(review.related_channels)
    total = time.perf_counter() - t0
    return {
        "seconds": total,
        "ingest_seconds": t_ingest,
        "hourly_seconds": t_load,
        "load_and_review_seconds": total - t_ingest - t_load,
        "rows": summary.readings_written,
        "episodes": episodes,
        "channels_with_cycle": cycles,
        "related_pairs": related,
        "store_mb": sum(f.stat().st_size for f in store_root.rglob("*.parquet")) / 1e6,
        "peak_rss_mb": _peak_rss_mb(),
    }


def _child(phase: str, path: Path, store_root: Path) -> dict:
    cmd = [sys.executable, __file__, "--phase", phase, "--file", str(path)]
    cmd += ["--store", str(store_root)]
    out = subprocess.run(cmd, check=True, capture_output=True, text=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--scale", type=float, default=1.0, help="fraction of the 365 days")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")
    parser.add_argument("--workdir", type=Path, help="folder for temporary data")
    parser.add_argument("--phase", choices=["floor-channel", "floor-single", "ours"])
    parser.add_argument("--file", type=Path)
    parser.add_argument("--store", type=Path)
    args = parser.parse_args(argv)

    if args.phase:
        if args.phase == "floor-channel":
            result = phase_floor_channel(args.file)
        elif args.phase == "floor-single":
            result = phase_floor_single(args.file)
        else:
            result = phase_ours(args.file, args.store)
        print(json.dumps(result))
        return 0

    days = max(1, round(DAYS * args.scale))
    with tempfile.TemporaryDirectory(dir=args.workdir) as tmp:
        work = Path(tmp)
        data = work / "readings.parquet"
        t0 = time.perf_counter()
        rows = generate(data, days)
        t_gen = time.perf_counter() - t0
        floor_channel = _child("floor-channel", data, work / "unused")
        floor_single = _child("floor-single", data, work / "unused")
        ours = _child("ours", data, work / "store")
        result = {
            "channels": CHANNELS,
            "days": days,
            "rows": rows,
            "file_mb": os.path.getsize(data) / 1e6,
            "generate_seconds": t_gen,
            "floor_channel": floor_channel,
            "floor_single": floor_single,
            "ours": ours,
            "ratio_vs_floor_channel": ours["seconds"] / floor_channel["seconds"],
            "ratio_vs_floor_single": ours["seconds"] / floor_single["seconds"],
            "cpus": os.cpu_count(),
        }
    if args.json:
        print(json.dumps(result, indent=2))
    else:
        print(f"{rows:,} readings ({CHANNELS} channels x {days} days), ", end="")
        print(f"file {result['file_mb']:.0f} MB")
        fc, fs = floor_channel, floor_single
        print(
            f"floor, one duckdb GROUP BY per channel: {fc['seconds']:.2f} s, "
            f"peak RSS {fc['peak_rss_mb']:.0f} MB"
        )
        print(
            f"floor, one duckdb GROUP BY channel:     {fs['seconds']:.2f} s, "
            f"peak RSS {fs['peak_rss_mb']:.0f} MB"
        )
        print(
            f"ours, ingest + review:                  {ours['seconds']:.2f} s "
            f"(ingest {ours['ingest_seconds']:.2f}, hourly means {ours['hourly_seconds']:.2f}, "
            f"load + review {ours['load_and_review_seconds']:.2f}), "
            f"peak RSS {ours['peak_rss_mb']:.0f} MB, "
            f"store {ours['store_mb']:.1f} MB"
        )
        print(
            f"ratio vs per-channel floor: {result['ratio_vs_floor_channel']:.2f}x (goal <= 2x); "
            f"vs single-query floor: {result['ratio_vs_floor_single']:.2f}x"
        )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
