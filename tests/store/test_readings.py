"""The readings store: long and wide CSV and Parquet, time zones, duplicates, order, errors."""

from __future__ import annotations

from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from ledger.domain.detector import hourly_means
from ledger.errors import InputError
from ledger.store.readings import ReadingsInputError, ReadingStore


def write(path: Path, text: str) -> Path:
    path.write_text(text.strip() + "\n", encoding="utf-8")
    return path


def files_under(root: Path) -> list[str]:
    if not root.exists():
        return []
    return sorted(str(p.relative_to(root)) for p in root.rglob("*") if p.is_file())


@pytest.fixture
def store(tmp_path: Path) -> ReadingStore:
    return ReadingStore(tmp_path / "readings")


def utc(*args: int) -> datetime:
    return datetime(*args, tzinfo=UTC)


# --------------------------------------------------------------------------- formats


def test_long_csv_with_offsets_is_stored_in_utc_by_channel_and_month(
    store: ReadingStore, tmp_path: Path
) -> None:
    src = write(
        tmp_path / "long.csv",
        """
time,channel,ppm
2025-01-31T23:59:00Z,A1,3
2025-02-01T01:00:00+01:00,A1,4
2025-01-31T23:59:00Z,A2,5.5
2025-02-01T00:01:00+00:00,A2,6
""",
    )
    summary = store.ingest(src, "DE-HAM")
    assert summary.form == "long"
    assert summary.readings_written == 4
    assert summary.channels == ("A1", "A2")
    assert summary.first_at == utc(2025, 1, 31, 23, 59)
    assert files_under(store.root) == [
        "site=DE-HAM/channel=A1/month=2025-01/part-0.parquet",
        "site=DE-HAM/channel=A1/month=2025-02/part-0.parquet",
        "site=DE-HAM/channel=A2/month=2025-01/part-0.parquet",
        "site=DE-HAM/channel=A2/month=2025-02/part-0.parquet",
    ]
    a1 = store.load("DE-HAM", "A1")
    # 01:00+01:00 is midnight UTC, so it belongs to the February partition.
    assert a1["time"].tolist() == [
        pd.Timestamp("2025-01-31 23:59", tz="UTC"),
        pd.Timestamp("2025-02-01 00:00", tz="UTC"),
    ]
    assert str(a1["time"].dtype) == "datetime64[us, UTC]"
    assert a1["ppm"].tolist() == [3.0, 4.0]
    assert store.channels("DE-HAM") == ["A1", "A2"]
    assert store.sites() == ["DE-HAM"]


def test_wide_csv_with_naive_times_needs_tz_and_keeps_empty_cells_out(
    store: ReadingStore, tmp_path: Path
) -> None:
    src = write(
        tmp_path / "wide.csv",
        """
time,A1,A2
2025-01-15 10:00:00,3,4
2025-01-15 10:01:00,,4.5
2025-07-15 10:00:00,7,
""",
    )
    summary = store.ingest(src, "S1", tz="Europe/Berlin")
    assert summary.form == "wide"
    assert summary.empty_cells == 2
    assert summary.readings_written == 4
    # Berlin is UTC+1 in January and UTC+2 in July.
    assert store.load("S1", "A1")["time"].tolist() == [
        pd.Timestamp("2025-01-15 09:00", tz="UTC"),
        pd.Timestamp("2025-07-15 08:00", tz="UTC"),
    ]
    assert store.load("S1", "A2")["ppm"].tolist() == [4.0, 4.5]


def test_naive_times_without_tz_are_an_error_naming_column_and_value(
    store: ReadingStore, tmp_path: Path
) -> None:
    src = write(tmp_path / "naive.csv", "Timestamp,A1\n2025-01-15 10:00:00,3\n")
    with pytest.raises(InputError) as err:
        store.ingest(src, "S1")
    assert err.value.field == "Timestamp"
    assert "2025-01-15 10:00:00" in str(err.value)
    assert "tz" in str(err.value)
    assert files_under(store.root) == []


def test_parquet_long_with_aware_timestamps_and_wide_with_naive(
    store: ReadingStore, tmp_path: Path
) -> None:
    long = tmp_path / "long.parquet"
    pq.write_table(
        pa.table(
            {
                "time": pa.array(
                    [utc(2025, 3, 1, 0, 0), utc(2025, 3, 1, 0, 1)],
                    type=pa.timestamp("ms", tz="America/New_York"),
                ),
                "channel": ["C7", "C7"],
                "ppm": [1.5, 2.5],
            }
        ),
        long,
    )
    assert store.ingest(long, "US-1").readings_written == 2
    assert store.load("US-1", "C7")["time"].iloc[0] == pd.Timestamp("2025-03-01", tz="UTC")

    wide = tmp_path / "wide.parquet"
    frame = pd.DataFrame(
        {"time": pd.to_datetime(["2025-03-01 09:00", "2025-03-01 09:01"]), "D1": [1.0, np.nan]}
    )
    frame.to_parquet(wide)
    with pytest.raises(InputError):
        store.ingest(wide, "US-1")
    summary = store.ingest(wide, "US-1", tz="America/New_York")
    assert (summary.readings_written, summary.empty_cells) == (1, 1)
    assert store.load("US-1", "D1")["time"].iloc[0] == pd.Timestamp("2025-03-01 14:00", tz="UTC")


# --------------------------------------------------------------------------- order, duplicates


def test_duplicates_are_dropped_and_counted_and_out_of_order_rows_sorted(
    store: ReadingStore, tmp_path: Path
) -> None:
    src = write(
        tmp_path / "messy.csv",
        """
time,channel,ppm
2025-01-01T00:02:00Z,A1,3
2025-01-01T00:00:00Z,A1,1
2025-01-01T00:01:00Z,A1,2
2025-01-01T00:01:00Z,A1,2
2025-01-01T00:00:00Z,A1,9
""",
    )
    summary = store.ingest(src, "S1")
    assert summary.out_of_order is True
    assert summary.duplicates_dropped == 2
    assert summary.conflicting_duplicates == 1  # 00:00 read 1 then 9: the first is kept
    assert summary.readings_written == 3
    loaded = store.load("S1", "A1")
    assert loaded["ppm"].tolist() == [1.0, 2.0, 3.0]
    assert loaded["time"].is_monotonic_increasing


def test_reingest_of_overlapping_data_does_not_duplicate(
    store: ReadingStore, tmp_path: Path
) -> None:
    first = write(
        tmp_path / "a.csv",
        "time,channel,ppm\n2025-01-01T00:00:00Z,A1,1\n2025-01-01T00:01:00Z,A1,2\n",
    )
    second = write(
        tmp_path / "b.csv",
        "time,channel,ppm\n2025-01-01T00:01:00Z,A1,5\n2025-01-01T00:02:00Z,A1,3\n",
    )
    store.ingest(first, "S1")
    again = store.ingest(first, "S1")
    assert (again.readings_written, again.already_stored, again.partitions_written) == (0, 2, 0)
    overlap = store.ingest(second, "S1")
    assert overlap.readings_written == 1
    assert overlap.already_stored == 1
    assert overlap.conflicts_with_store == 1  # 00:01 stored as 2, offered as 5: stored kept
    assert store.load("S1", "A1")["ppm"].tolist() == [1.0, 2.0, 3.0]
    assert len(files_under(store.root)) == 1


# --------------------------------------------------------------------------- errors


def test_bad_rows_are_all_reported_by_row_number_and_nothing_is_written(
    store: ReadingStore, tmp_path: Path
) -> None:
    src = write(
        tmp_path / "bad.csv",
        """
time,channel,ppm
2025-01-01T00:00:00Z,A1,1
2025-01-01T00:01:00Z,A1,ERR
yesterday,A1,3
2025-01-01T00:03:00Z,,3
2025-01-01T00:04:00Z,A1,-2
""",
    )
    with pytest.raises(ReadingsInputError) as err:
        store.ingest(src, "S1")
    rows = [(b.row, b.column) for b in err.value.bad_rows]
    assert rows == [(2, "ppm"), (3, "time"), (4, "channel"), (5, "ppm")]
    assert "Nothing was imported" in str(err.value)
    assert isinstance(err.value, InputError)
    assert files_under(store.root) == []


def test_mixed_naive_and_offset_times_are_bad_rows(store: ReadingStore, tmp_path: Path) -> None:
    src = write(
        tmp_path / "mixed.csv",
        "time,A1\n2025-01-01T00:00:00Z,1\n2025-01-01T00:01:00Z,1\n2025-01-01 00:02:00,1\n",
    )
    with pytest.raises(ReadingsInputError) as err:
        store.ingest(src, "S1", tz="UTC")
    assert [(b.row, b.problem) for b in err.value.bad_rows] == [
        (3, "has no UTC offset, unlike the other rows")
    ]


def test_clock_change_repeat_is_resolved_by_order_and_a_skipped_time_is_an_error(
    store: ReadingStore, tmp_path: Path
) -> None:
    # Europe/Berlin, 27 Oct 2024: 02:00-02:59 happens twice (first +02:00, then +01:00).
    autumn = write(
        tmp_path / "autumn.csv",
        "time,A1\n2024-10-27 01:59:00,1\n2024-10-27 02:30:00,2\n2024-10-27 02:59:00,3\n"
        "2024-10-27 02:00:00,4\n2024-10-27 02:30:00,5\n2024-10-27 03:00:00,6\n",
    )
    store.ingest(autumn, "S1", tz="Europe/Berlin")
    got = store.load("S1", "A1")
    assert got["ppm"].tolist() == [1.0, 2.0, 3.0, 4.0, 5.0, 6.0]
    assert got["time"].iloc[1] == pd.Timestamp("2024-10-27 00:30", tz="UTC")
    assert got["time"].iloc[4] == pd.Timestamp("2024-10-27 01:30", tz="UTC")
    # 31 Mar 2024: 02:30 does not exist in Berlin.
    spring = write(
        tmp_path / "spring.csv", "time,A1\n2024-03-31 01:59:00,1\n2024-03-31 02:30:00,2\n"
    )
    with pytest.raises(ReadingsInputError) as err:
        store.ingest(spring, "S2", tz="Europe/Berlin")
    assert err.value.bad_rows[0].row == 2
    assert store.channels("S2") == []


def test_channel_map_renames_and_leaves_out_columns(store: ReadingStore, tmp_path: Path) -> None:
    src = write(
        tmp_path / "wide.csv",
        "time,Ch 1,Ch 2,temperature\n2025-01-01T00:00:00Z,3,4,fault\n",
    )
    summary = store.ingest(src, "S1", channel_map={"Ch 1": "LT-RACK-1"})
    assert summary.channels == ("LT-RACK-1",)
    assert summary.ignored_columns == ("Ch 2", "temperature")
    assert store.channels("S1") == ["LT-RACK-1"]


def test_codes_that_are_unsafe_as_directory_names_are_refused(
    store: ReadingStore, tmp_path: Path
) -> None:
    src = write(tmp_path / "x.csv", "time,channel,ppm\n2025-01-01T00:00:00Z,../A1,3\n")
    with pytest.raises(InputError):
        store.ingest(src, "S1")
    with pytest.raises(InputError):
        store.ingest(src, "site=1", channel_map={"../A1": "A1"})
    assert files_under(store.root) == []


# --------------------------------------------------------------------------- reading back


@pytest.fixture
def year(store: ReadingStore, tmp_path: Path) -> ReadingStore:
    """Two channels, one reading every 10 minutes through 2025 (constructed)."""
    t = pd.date_range("2025-01-01", "2026-01-01", freq="10min", tz="UTC", inclusive="left")
    ppm = (np.arange(len(t)) % 144).astype(float)
    src = tmp_path / "year.parquet"
    pd.DataFrame({"time": t, "A1": ppm, "A2": ppm * 2}).to_parquet(src)
    store.ingest(src, "S1")
    return store


def test_load_window_is_half_open_and_prunes_months(year: ReadingStore) -> None:
    got = year.load("S1", "A1", utc(2025, 3, 31, 23, 50), utc(2025, 4, 1, 0, 20))
    assert got["time"].tolist() == [
        pd.Timestamp("2025-03-31 23:50", tz="UTC"),
        pd.Timestamp("2025-04-01 00:00", tz="UTC"),
        pd.Timestamp("2025-04-01 00:10", tz="UTC"),
    ]
    months = [p.parent.name for p in year._files("S1", "A1", utc(2025, 3, 31), utc(2025, 4, 2))]
    assert months == ["month=2025-03", "month=2025-04"]
    assert len(year.load("S1", "A1")) == 365 * 144
    with pytest.raises(InputError):
        year.load("S1", "A1", datetime(2025, 1, 1))  # naive bound


def test_hourly_means_from_the_store_equal_the_domain_computation(year: ReadingStore) -> None:
    start, end = utc(2025, 6, 1), utc(2025, 6, 8)
    got = year.hourly_means("S1", start=start, end=end)
    assert sorted(got) == ["A1", "A2"]
    expected = hourly_means(year.load("S1", "A2", start, end))
    assert len(got["A2"]) == 7 * 24
    assert got["A2"]["ppm"].to_numpy() == pytest.approx(expected["ppm"].to_numpy())
    assert (got["A2"]["time"].to_numpy() == expected["time"].to_numpy()).all()
    assert set(got["A2"]["count"]) == {6}


def test_layout_is_readable_by_duckdb_with_hive_partitioning(year: ReadingStore) -> None:
    import duckdb

    pattern = str(year.root / "*" / "*" / "*" / "*.parquet")
    rows = duckdb.sql(
        f"SELECT site, channel, count(*) FROM read_parquet('{pattern}', hive_partitioning=true, "
        "hive_types_autocast=false) GROUP BY ALL ORDER BY ALL"
    ).fetchall()
    assert rows == [("S1", "A1", 52560), ("S1", "A2", 52560)]


def test_a_bad_value_deep_in_a_large_csv_is_still_a_numbered_bad_row(
    store: ReadingStore, tmp_path: Path
) -> None:
    lines = [f"2025-01-{1 + m // 1440:02d}T{m // 60 % 24:02d}:{m % 60:02d}:00Z,A1,{m % 90}"
             for m in range(30 * 1440)]  # fmt: skip
    lines[40_000] = lines[40_000].rsplit(",", 1)[0] + ",ERR"
    src = write(tmp_path / "late.csv", "time,channel,ppm\n" + "\n".join(lines))
    with pytest.raises(ReadingsInputError) as err:
        store.ingest(src, "S1")
    assert [(b.row, b.value) for b in err.value.bad_rows] == [(40_001, "ERR")]
    assert files_under(store.root) == []


def test_a_file_with_only_a_header_imports_nothing(store: ReadingStore, tmp_path: Path) -> None:
    summary = store.ingest(write(tmp_path / "empty.csv", "time,channel,ppm"), "S1")
    assert (summary.rows_read, summary.readings_written, summary.channels) == (0, 0, ())
