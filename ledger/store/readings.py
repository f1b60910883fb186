"""Columnar store of detector readings, kept beside the database.

Layout (hive style, one Parquet file per site, channel and UTC month)::

    <root>/site=<site>/channel=<channel>/month=2025-01/part-0.parquet

Each file holds two columns, ``time`` (timestamp[us, UTC], sorted, unique) and ``ppm``
(float64); site, channel and month live in the path only. Re-ingesting overlapping data
merges into the month's file: a reading whose channel and time are already stored is skipped
(the stored value is kept and a differing value is counted as a conflict), so nothing is ever
duplicated and reads need no de-duplication. Files are replaced atomically (write to a
temporary name, then rename), and a file is validated completely before anything is written.
One writer at a time per store.

Why this layout: a site with 48 channels logging once a minute writes about 25 million
readings a year. One file per channel-month is ~44 000 rows, compresses to a few tens of
kilobytes (delta-coded times, dictionary-coded ppm, zstd) and is read in a few milliseconds;
a review of one channel over a period opens only that channel's months (partition pruning by
path), and the same tree can be queried ad hoc with duckdb's ``read_parquet(...,
hive_partitioning = true)``. See docs/detectors.md.
"""

from __future__ import annotations

import os
import re
import uuid
from collections.abc import Iterable, Mapping, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pcsv
import pyarrow.dataset as ds
import pyarrow.parquet as pq

from ledger.errors import InputError, NotFound

# Site and channel codes become directory names, so they are limited to characters that are
# safe in paths on every platform and do not clash with the "key=value" hive syntax.
CODE_PATTERN = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._ -]{0,63}$")

# Column names (case-insensitive) taken as the time column; ISO 8601 text or a timestamp.
TIME_COLUMNS = ("time", "timestamp", "datetime")

# How many bad rows an error message lists before it says "and N more".
MAX_LISTED_ROWS = 10

PART_NAME = "part-0.parquet"
SCHEMA = pa.schema([("time", pa.timestamp("us", tz="UTC")), ("ppm", pa.float64())])

# ISO 8601 text that carries its own offset ("Z", "+01:00", "-0500") after a clock time.
_OFFSET_RE = r"\d{2}:\d{2}(?::\d{2}(?:[.,]\d+)?)?\s*(?:Z|z|[+-]\d{2}(?::?\d{2})?)$"
_US_PER_S = 1_000_000
_NAT = np.iinfo(np.int64).min


@dataclass(frozen=True, slots=True)
class BadRow:
    """One rejected row of an input file (row 1 is the first data row, after any header)."""

    row: int
    column: str
    value: str
    problem: str


class ReadingsInputError(InputError):
    """An input file has bad rows; ``bad_rows`` lists them all. Nothing was written."""

    def __init__(self, source: str, bad_rows: Sequence[BadRow]) -> None:
        self.bad_rows = tuple(bad_rows)
        first = self.bad_rows[0]
        listed = ", ".join(f"{b.row} ({b.column}: {b.problem})" for b in self.bad_rows[:MAX_LISTED_ROWS])
        more = len(self.bad_rows) - MAX_LISTED_ROWS
        tail = f" and {more} more" if more > 0 else ""
        super().__init__(
            f"{source} row {first.row}, column {first.column}",
            first.value,
            f"{first.problem}; {len(self.bad_rows)} bad row(s) in all: {listed}{tail}. Nothing was imported.",
        )


@dataclass(frozen=True, slots=True)
class IngestSummary:
    """What one ingest did."""

    site_code: str
    source: str
    form: str  # "long" (time, channel, ppm) or "wide" (time + one column per channel)
    rows_read: int  # data rows in the file
    readings_read: int  # non-empty readings in the file (after the channel map)
    empty_cells: int  # readings left empty in the file (no reading for that time)
    duplicates_dropped: int  # same channel and time repeated in the file; the first is kept
    conflicting_duplicates: int  # of those, how many had a different ppm
    already_stored: int  # readings whose channel and time were already in the store
    conflicts_with_store: int  # of those, how many differ from the stored value (kept)
    readings_written: int  # new readings added to the store
    out_of_order: bool  # the file was not in time order per channel (it was sorted)
    channels: tuple[str, ...]
    ignored_columns: tuple[str, ...]  # columns (or long-form channels) not imported
    first_at: datetime | None
    last_at: datetime | None
    partitions_written: int


def _check_code(kind: str, value: str) -> str:
    if not isinstance(value, str) or not CODE_PATTERN.match(value):
        raise InputError(
            kind,
            value,
            "must be 1-64 letters, digits, spaces, '.', '_' or '-', starting with a letter or "
            "digit (use channel_map to rename channels)",
        )
    return value


def _zone(tz: str) -> str:
    try:
        ZoneInfo(tz)
    except (ZoneInfoNotFoundError, ValueError, TypeError) as exc:
        raise InputError("tz", tz, "is not a known IANA time zone") from exc
    return tz


# --------------------------------------------------------------------------- reading files


def _read_table(path: Path) -> pa.Table:
    suffix = path.suffix.lower()
    if not path.is_file():
        raise NotFound(f"readings file: {str(path)!r} does not exist")
    try:
        if suffix in (".parquet", ".pq"):
            # Channel names repeat on every row: read them dictionary-encoded.
            names = pq.read_schema(path).names
            as_dict = [c for c in names if c.strip().lower() == "channel"]
            return pq.read_table(path, read_dictionary=as_dict or None)
        if suffix in (".csv", ".txt"):
            # pyarrow infers each column's type over the whole file, so a stray text value
            # deep in a number column makes the column text and is reported row by row.
            return pcsv.read_csv(path)
    except (pa.ArrowInvalid, OSError) as exc:
        raise InputError("file", str(path), f"could not be read: {exc}") from exc
    raise InputError("file", str(path), "must be .csv or .parquet")


def _as_strings(col: pa.ChunkedArray) -> pd.Series:
    return pd.Series(col.to_pandas(), dtype="object")


def _parse_times(col: pa.ChunkedArray, name: str, bad: list[BadRow]) -> tuple[np.ndarray, np.ndarray, bool]:
    """Epoch microseconds, a validity mask, and whether the times were naive (wall clock)."""
    n = len(col)
    typ = col.type
    if pa.types.is_null(typ):  # every cell empty
        bad.extend(BadRow(i + 1, name, "", "time is missing") for i in range(n))
        return np.zeros(n, dtype=np.int64), np.zeros(n, dtype=bool), False
    if pa.types.is_timestamp(typ):
        arr = col.cast(pa.timestamp("us", tz=typ.tz)) if typ.unit != "us" else col
        if arr.null_count == 0:
            valid = np.ones(n, dtype=bool)
        else:
            valid = ~np.array(arr.is_null().to_numpy(zero_copy_only=False), dtype=bool)
            arr = pc.fill_null(arr, 0)
        us = np.asarray(arr.cast(pa.int64()).to_numpy(), dtype=np.int64)
        for i in np.flatnonzero(~valid):
            bad.append(BadRow(int(i) + 1, name, "", "time is missing"))
        return us, valid, typ.tz is None
    if pa.types.is_string(typ) or pa.types.is_large_string(typ):
        text = _as_strings(col)
        stripped = text.str.strip()
        present = np.array(stripped.notna() & (stripped != ""), dtype=bool)
        has_offset = np.array(stripped.str.contains(_OFFSET_RE, regex=True, na=False), dtype=bool)
        aware_rows = present & has_offset
        naive_rows = present & ~has_offset
        aware_us = _iso_us(stripped.where(aware_rows), utc=True)
        naive_us = _iso_us(stripped.where(naive_rows), utc=False)
        aware_ok = aware_rows & (aware_us != _NAT)
        naive_ok = naive_rows & (naive_us != _NAT)
        valid = aware_ok | naive_ok
        for i in np.flatnonzero(~present):
            bad.append(BadRow(int(i) + 1, name, "", "time is missing"))
        for i in np.flatnonzero(present & ~valid):
            bad.append(BadRow(int(i) + 1, name, str(text.iat[i]), "is not an ISO 8601 date-time"))
        if aware_ok.any() and naive_ok.any():
            naive_minority = naive_ok.sum() <= aware_ok.sum()
            minority = naive_ok if naive_minority else aware_ok
            what = "has no UTC offset" if naive_minority else "has a UTC offset"
            for i in np.flatnonzero(minority):
                bad.append(BadRow(int(i) + 1, name, str(text.iat[i]), f"{what}, unlike the other rows"))
            return np.zeros(n, dtype=np.int64), np.zeros(n, dtype=bool), False
        naive = not aware_ok.any()
        us = np.where(aware_ok, aware_us, np.where(naive_ok, naive_us, 0))
        return us, valid, naive
    raise InputError(name, str(typ), "must hold ISO 8601 date-times (text) or timestamps, not numbers")


def _iso_us(text: pd.Series, *, utc: bool) -> np.ndarray:
    """ISO 8601 text -> epoch microseconds (UTC if ``utc``, else wall clock); NaT -> _NAT."""
    if text.isna().all():
        return np.full(len(text), _NAT, dtype=np.int64)
    parsed = pd.to_datetime(text, format="ISO8601", errors="coerce", utc=utc)
    return np.array(pd.DatetimeIndex(parsed).as_unit("us").asi8, dtype=np.int64)


def _parse_ppm(col: pa.ChunkedArray, name: str, bad: list[BadRow]) -> tuple[np.ndarray, np.ndarray]:
    """Values as float64 (NaN where empty) and a mask of non-empty cells; bad cells reported."""
    typ = col.type
    if pa.types.is_null(typ):
        n = len(col)
        return np.full(n, np.nan), np.zeros(n, dtype=bool)
    if pa.types.is_integer(typ) or pa.types.is_floating(typ) or pa.types.is_decimal(typ):
        values = np.asarray(col.cast(pa.float64()).to_numpy(zero_copy_only=False), dtype=float)
        if col.null_count == 0:
            present = np.ones(len(values), dtype=bool)
        else:
            present = ~np.array(col.is_null().to_numpy(zero_copy_only=False), dtype=bool)
        # A NaN stored in a Parquet float column is an empty reading, like a null.
        present &= ~np.isnan(values)
    elif pa.types.is_string(typ) or pa.types.is_large_string(typ):
        text = _as_strings(col)
        stripped = text.str.strip()
        present = np.array(stripped.notna() & (stripped != ""), dtype=bool)
        values = pd.to_numeric(stripped.where(present), errors="coerce").to_numpy(dtype=float)
        not_number = present & np.isnan(values)
        for i in np.flatnonzero(not_number):
            bad.append(BadRow(int(i) + 1, name, str(text.iat[i]), "is not a number"))
        present &= ~not_number
    else:
        raise InputError(name, str(typ), "must hold numbers (ppm)")
    with np.errstate(invalid="ignore"):
        infinite = present & ~np.isfinite(values)
        negative = present & (values < 0)
    for i in np.flatnonzero(infinite):
        bad.append(BadRow(int(i) + 1, name, str(values[i]), "is not a finite number"))
    for i in np.flatnonzero(negative):
        bad.append(BadRow(int(i) + 1, name, str(values[i]), "is negative"))
    return values, present & ~infinite & ~negative


def _localize(us: np.ndarray, groups: Iterable[np.ndarray], tz: str, name: str, bad: list[BadRow]) -> np.ndarray:
    """Wall-clock microseconds in ``tz`` -> UTC microseconds.

    Each group (row indices of one series in file order) is localised on its own, so the
    repeated hour at the end of daylight saving time can be resolved from the order of the
    readings; a time that does not exist, or an ambiguous one that order cannot resolve, is
    a bad row.
    """
    out = np.zeros_like(us)
    for rows in groups:
        if len(rows) == 0:
            continue
        idx = pd.DatetimeIndex(us[rows].view("datetime64[us]"))
        try:
            local = idx.tz_localize(tz, ambiguous="raise", nonexistent="raise")
        except ValueError:
            try:
                local = idx.tz_localize(tz, ambiguous="infer", nonexistent="raise")
            except ValueError:
                marked = idx.tz_localize(tz, ambiguous="NaT", nonexistent="NaT")
                for i in rows[np.asarray(marked.isna())]:
                    bad.append(
                        BadRow(
                            int(i) + 1,
                            name,
                            str(pd.Timestamp(us[i], unit="us")),
                            f"is ambiguous or does not exist in {tz} (clock change); export with UTC offsets or in UTC",
                        )
                    )
                continue
        out[rows] = local.as_unit("us").asi8
    return out


@dataclass(slots=True)
class _Parsed:
    form: str
    rows_read: int
    us: np.ndarray  # UTC microseconds
    codes: np.ndarray  # index into channels
    ppm: np.ndarray
    channels: list[str]
    empty_cells: int
    ignored: list[str]


def _encode_channels(col: pa.ChunkedArray) -> tuple[list[str], np.ndarray]:
    """Distinct channel names and, per row, the index of its name (-1 where missing)."""
    if pa.types.is_dictionary(col.type):
        col = col.unify_dictionaries()
        if col.num_chunks == 0:
            return [], np.empty(0, dtype=np.int64)
        dictionary = col.chunk(0).dictionary
        indices = pa.chunked_array([c.indices for c in col.chunks])
    else:
        if not (pa.types.is_string(col.type) or pa.types.is_large_string(col.type)):
            col = col.cast(pa.string())
        enc = pc.dictionary_encode(col).combine_chunks()
        dictionary, indices = enc.dictionary, enc.indices
    raw = [None if v is None else str(v).strip() for v in dictionary.to_pylist()]
    names = sorted({v for v in raw if v})
    # Blank names count as missing; names equal after stripping share one code.
    lookup = np.array([names.index(v) if v else -1 for v in raw] + [-1], dtype=np.int32)
    if indices.null_count:
        indices = pc.fill_null(indices, -1)
    idx = np.asarray(indices.to_numpy())
    if len(raw) == len(names) and (lookup[:-1] == np.arange(len(names))).all():
        return names, idx.astype(np.int32, copy=False)
    return names, lookup[idx]


def _find_time_column(names: list[str]) -> str:
    hits = [c for c in names if c.strip().lower() in TIME_COLUMNS]
    if len(hits) != 1:
        problem = "has no time column" if not hits else "has more than one time column"
        raise InputError("columns", names, f"{problem}; name exactly one of {list(TIME_COLUMNS)}")
    return hits[0]


def _parse(table: pa.Table, source: str, tz: str | None, channel_map: Mapping[str, str] | None) -> _Parsed:
    names = list(table.column_names)
    time_col = _find_time_column(names)
    lower = {c.strip().lower(): c for c in names}
    bad: list[BadRow] = []
    n = table.num_rows
    us, time_ok, naive = _parse_times(table.column(time_col), time_col, bad)
    if naive and tz is None and time_ok.any():
        first = int(np.flatnonzero(time_ok)[0])
        raise InputError(
            time_col,
            str(pd.Timestamp(us[first], unit="us")),
            "has no time zone; pass tz (the logger's IANA zone, e.g. 'Europe/Berlin') or "
            "export times with a UTC offset",
        )
    if "channel" in lower and "ppm" in lower:
        form = "long"
        ch_col, ppm_col = lower["channel"], lower["ppm"]
        ignored = [c for c in names if c not in (time_col, ch_col, ppm_col)]
        names_in_file, codes = _encode_channels(table.column(ch_col))
        for i in np.flatnonzero(codes < 0):
            bad.append(BadRow(int(i) + 1, ch_col, "", "channel is missing"))
        ppm_bad: list[BadRow] = []
        values, present = _parse_ppm(table.column(ppm_col), ppm_col, ppm_bad)
        # Map file channel names to stored codes; unmapped channels are ignored.
        target: list[str | None] = []
        for nm in names_in_file:
            target.append(channel_map.get(nm) if channel_map is not None else nm)
        ignored += [f"channel {nm!r}" for nm, tg in zip(names_in_file, target, strict=True) if tg is None]
        channels = sorted({t for t in target if t is not None})
        for c in channels:
            _check_code("channel", c)
        lookup = np.array([channels.index(t) if t is not None else -1 for t in target] + [-1], dtype=np.int32)
        identity = bool((lookup[:-1] == np.arange(len(lookup) - 1)).all())
        # codes == -1 (missing name) picks the trailing -1 of the lookup.
        mapped = codes if identity and not (codes < 0).any() else lookup[codes]
        # A bad value in a channel the map leaves out does not block the import.
        bad += [b for b in ppm_bad if mapped[b.row - 1] >= 0 or codes[b.row - 1] < 0]
        usable = time_ok & (mapped >= 0)
        keep = usable & present
        empty = int(usable.sum() - keep.sum())
        if naive and tz is not None:
            rows = np.flatnonzero(keep)
            groups = [rows[mapped[rows] == k] for k in range(len(channels))]
            us = _localize(us, groups, _zone(tz), time_col, bad)
        if bad:
            raise ReadingsInputError(source, sorted(bad, key=lambda b: (b.row, b.column)))
        if not keep.all():
            rows = np.flatnonzero(keep)
            us, mapped, values = us[rows], mapped[rows], values[rows]
        return _Parsed(form, n, us, mapped, values, channels, empty, ignored)

    form = "wide"
    candidates = [c for c in names if c != time_col]
    if channel_map is not None:
        chosen = [(c, channel_map[c.strip()]) for c in candidates if c.strip() in channel_map]
    else:
        chosen = [(c, c.strip()) for c in candidates]
    ignored = [c for c in candidates if c not in {src for src, _ in chosen}]
    if not chosen:
        raise InputError(
            "columns",
            names,
            "hold no channel columns (wide form) and no 'channel' and 'ppm' columns (long form)",
        )
    channels = sorted({dst for _, dst in chosen})
    for c in channels:
        _check_code("channel", c)
    if naive and tz is not None:
        rows_ok = np.flatnonzero(time_ok)
        us = _localize(us, [rows_ok], _zone(tz), time_col, bad)
    us_parts, code_parts, ppm_parts = [], [], []
    empty = 0
    for src, dst in chosen:
        values, present = _parse_ppm(table.column(src), src, bad)
        keep = present & time_ok
        empty += int((time_ok & ~present).sum())
        rows = np.flatnonzero(keep)
        us_parts.append(us[rows])
        code_parts.append(np.full(len(rows), channels.index(dst), dtype=np.int32))
        ppm_parts.append(values[rows])
    if bad:
        raise ReadingsInputError(source, sorted(bad, key=lambda b: (b.row, b.column)))
    return _Parsed(
        form,
        n,
        np.concatenate(us_parts),
        np.concatenate(code_parts),
        np.concatenate(ppm_parts),
        channels,
        empty,
        ignored,
    )


# --------------------------------------------------------------------------- the store


def _month_label(month: np.datetime64) -> str:
    return str(month.astype("datetime64[M]"))


def _to_datetime(us: int) -> datetime:
    return datetime.fromtimestamp(us // _US_PER_S, UTC).replace(microsecond=int(us % _US_PER_S))


class ReadingStore:
    """Detector readings as Parquet files partitioned by site, channel and month.

    Args:
        root: the folder holding the tree (created on the first ingest), typically a
            ``readings/`` folder beside the database file.
    """

    def __init__(self, root: Path) -> None:
        self.root = Path(root)

    # -- paths

    def _channel_dir(self, site: str, channel: str) -> Path:
        return self.root / f"site={site}" / f"channel={channel}"

    def _month_dirs(self, site: str, channel: str) -> list[tuple[str, Path]]:
        base = self._channel_dir(site, channel)
        if not base.is_dir():
            return []
        out = []
        for d in base.iterdir():
            if d.is_dir() and d.name.startswith("month="):
                out.append((d.name[len("month=") :], d))
        return sorted(out)

    def _files(self, site: str, channel: str, start: datetime | None, end: datetime | None) -> list[Path]:
        """The month files of one channel that overlap [start, end) (pruning by path)."""
        _check_code("site", site)
        _check_code("channel", channel)
        lo = _bound("start", start)
        hi = _bound("end", end)
        lo_month = None if lo is None else _month_label(np.datetime64(lo, "us"))
        hi_month = None if hi is None else _month_label(np.datetime64(hi - 1, "us"))
        files: list[Path] = []
        for month, d in self._month_dirs(site, channel):
            if (lo_month is not None and month < lo_month) or (hi_month is not None and month > hi_month):
                continue
            files.extend(sorted(d.glob("part-*.parquet")))
        return files

    # -- queries

    def sites(self) -> list[str]:
        """Site codes that have readings."""
        if not self.root.is_dir():
            return []
        return sorted(d.name[5:] for d in self.root.iterdir() if d.name.startswith("site="))

    def channels(self, site: str) -> list[str]:
        """Channel codes stored for a site, sorted."""
        base = self.root / f"site={_check_code('site', site)}"
        if not base.is_dir():
            return []
        return sorted(d.name[8:] for d in base.iterdir() if d.name.startswith("channel="))

    def load(
        self,
        site: str,
        channel: str,
        start: datetime | None = None,
        end: datetime | None = None,
    ) -> pd.DataFrame:
        """Readings of one channel with ``start <= time < end`` (either bound may be None).

        Only the month files that overlap the period are opened (partition pruning by path).

        Args:
            site: site code.
            channel: channel code.
            start: aware datetime, inclusive.
            end: aware datetime, exclusive.
        Returns:
            Columns ``time`` (datetime64[us, UTC], ascending) and ``ppm`` (float64).
        """
        files = self._files(site, channel, start, end)
        lo = _bound("start", start)
        hi = _bound("end", end)
        if not files:
            return pd.DataFrame(
                {
                    "time": pd.Series([], dtype="datetime64[us, UTC]"),
                    "ppm": pd.Series([], dtype="float64"),
                }
            )
        flt = None
        if lo is not None:
            flt = pc.field("time") >= pa.scalar(lo, SCHEMA.field("time").type)
        if hi is not None:
            below = pc.field("time") < pa.scalar(hi, SCHEMA.field("time").type)
            flt = below if flt is None else flt & below
        table = ds.dataset([str(f) for f in files], format="parquet", schema=SCHEMA).to_table(filter=flt)
        frame = table.to_pandas()
        t = frame["time"].array.asi8
        if len(t) > 1 and (np.diff(t) < 0).any():
            frame = frame.sort_values("time", kind="stable", ignore_index=True)
        return frame

    def hourly_means(
        self,
        site: str,
        *,
        channels: Sequence[str] | None = None,
        start: datetime | None = None,
        end: datetime | None = None,
    ) -> dict[str, pd.DataFrame]:
        """Mean ppm per UTC hour for some or all channels of a site, in one duckdb scan.

        The cheap input for ``review_channel(other_channels=...)``: a year of one channel is
        8 760 rows instead of 525 600, and duckdb aggregates inside the files without loading
        the readings into Python.

        Args:
            site: site code.
            channels: channel codes (default: every stored channel).
            start: aware datetime, inclusive; end: aware datetime, exclusive.
        Returns:
            Channel code -> DataFrame with ``time`` (hour start, datetime64[us, UTC]), ``ppm``
            (the hour's mean) and ``count`` (readings in the hour), ascending.
        """
        import duckdb

        wanted = self.channels(site) if channels is None else list(channels)
        files = [str(f) for ch in wanted for f in self._files(site, ch, start, end)]
        out = {ch: _empty_hourly() for ch in wanted}
        if not files:
            return out
        lo = _bound("start", start)
        hi = _bound("end", end)
        where, params = [], []
        if lo is not None:
            where.append("epoch_us(time) >= ?")
            params.append(lo)
        if hi is not None:
            where.append("epoch_us(time) < ?")
            params.append(hi)
        sql = (
            "SELECT channel, epoch_us(time) // 3600000000 AS hour, avg(ppm) AS ppm, "
            "count(*) AS count FROM read_parquet(?, hive_partitioning = true, "
            "hive_types_autocast = false) "
            + ("WHERE " + " AND ".join(where) + " " if where else "")
            + "GROUP BY channel, hour ORDER BY channel, hour"
        )
        with duckdb.connect() as con:
            res = con.execute(sql, [files, *params]).fetchnumpy()
        names = np.asarray(res["channel"], dtype=object)
        hours = np.asarray(res["hour"], dtype=np.int64)
        means = np.asarray(res["ppm"], dtype=float)
        counts = np.asarray(res["count"], dtype=np.int64)
        bounds = np.flatnonzero(names[1:] != names[:-1]) + 1
        for a, b in zip([0, *bounds.tolist()], [*bounds.tolist(), len(names)], strict=True):
            if a == b:
                continue
            out[str(names[a])] = pd.DataFrame(
                {
                    "time": pd.DatetimeIndex((hours[a:b] * 3600 * _US_PER_S).view("datetime64[us]")).tz_localize("UTC"),
                    "ppm": means[a:b],
                    "count": counts[a:b],
                }
            )
        return out

    # -- ingest

    def ingest(
        self,
        path: Path,
        site_code: str,
        *,
        tz: str | None = None,
        channel_map: Mapping[str, str] | None = None,
    ) -> IngestSummary:
        """Import a CSV or Parquet file of readings for one site.

        Long form has columns ``time``, ``channel``, ``ppm``; wide form has ``time`` and one
        column of ppm per channel. Times are ISO 8601 with a UTC offset, or naive wall-clock
        times in ``tz``. The whole file is checked first; on any bad row nothing is written.

        Args:
            path: the file (``.csv`` or ``.parquet``).
            site_code: the site the readings belong to.
            tz: IANA zone for naive times; ignored for times that carry an offset.
            channel_map: file channel name (or wide column name) -> stored channel code; when
                given, only the mapped channels are imported.
        Returns:
            An ``IngestSummary``.
        Raises:
            ReadingsInputError: bad rows (all listed); InputError: unusable columns, naive
            times without ``tz``; NotFound: no such file.
        """
        _check_code("site", site_code)
        if tz is not None:
            _zone(tz)
        path = Path(path)
        parsed = _parse(_read_table(path), path.name, tz, channel_map)
        return self._write(parsed, site_code, str(path))

    def ingest_frame(
        self, frame: pd.DataFrame, site_code: str, *, tz: str | None = None, source: str = "frame"
    ) -> IngestSummary:
        """Like ``ingest`` for an in-memory DataFrame of the same long or wide shape."""
        _check_code("site", site_code)
        if tz is not None:
            _zone(tz)
        table = pa.Table.from_pandas(frame, preserve_index=False)
        return self._write(_parse(table, source, tz, None), site_code, source)

    def _write(self, p: _Parsed, site: str, source: str) -> IngestSummary:
        us, codes, ppm = p.us, p.codes, p.ppm
        n_read = len(us)
        if n_read > 1 and not bool((codes[1:] >= codes[:-1]).all()):
            # Group by channel with a stable (radix) sort, keeping file order in a channel.
            small = codes.astype(np.int16) if len(p.channels) < 2**15 else codes
            order = np.argsort(small, kind="stable")
            codes, us, ppm = codes[order], us[order], ppm[order]
            del order, small
        bounds = np.flatnonzero(codes[1:] != codes[:-1]) + 1 if n_read > 1 else np.empty(0, int)
        seg_starts = np.concatenate(([0], bounds)).tolist() if n_read else []
        seg_ends = np.concatenate((bounds, [n_read])).tolist() if n_read else []

        jobs: list[tuple[Path, np.ndarray, np.ndarray]] = []
        n_dup = n_conflict_dup = 0
        out_of_order = False
        channels: list[str] = []
        first_us: list[int] = []
        last_us: list[int] = []
        for a, b in zip(seg_starts, seg_ends, strict=True):
            channel = p.channels[int(codes[a])]
            channels.append(channel)
            t, v = us[a:b], ppm[a:b]
            step = np.diff(t)
            if (step < 0).any():
                out_of_order = True
                order = np.argsort(t, kind="stable")
                t, v = t[order], v[order]
                step = np.diff(t)
            dup = step == 0
            if dup.any():
                n_dup += int(dup.sum())
                n_conflict_dup += int((dup & (v[1:] != v[:-1])).sum())
                first = np.concatenate(([True], ~dup))
                t, v = t[first], v[first]
            first_us.append(int(t[0]))
            last_us.append(int(t[-1]))
            # Split the channel into UTC months.
            m0 = np.datetime64(int(t[0]), "us").astype("datetime64[M]")
            m1 = np.datetime64(int(t[-1]), "us").astype("datetime64[M]")
            months = np.arange(m0, m1 + 1)
            edges = months.astype("datetime64[us]").astype(np.int64)
            cuts = np.searchsorted(t, edges[1:], "left").tolist()
            base = self._channel_dir(site, channel)
            for month, i, j in zip(months, [0, *cuts], [*cuts, len(t)], strict=True):
                if i < j:
                    jobs.append((base / f"month={_month_label(month)}", t[i:j], v[i:j]))

        workers = max(1, min(8, os.cpu_count() or 1))
        if len(jobs) > 1 and workers > 1:
            with ThreadPoolExecutor(max_workers=workers) as pool:
                results = list(pool.map(lambda job: _write_partition(*job), jobs))
        else:
            results = [_write_partition(*job) for job in jobs]
        return IngestSummary(
            site_code=site,
            source=source,
            form=p.form,
            rows_read=p.rows_read,
            readings_read=n_read,
            empty_cells=p.empty_cells,
            duplicates_dropped=n_dup,
            conflicting_duplicates=n_conflict_dup,
            already_stored=sum(r[1] for r in results),
            conflicts_with_store=sum(r[2] for r in results),
            readings_written=sum(r[0] for r in results),
            out_of_order=out_of_order,
            channels=tuple(sorted(channels)),
            ignored_columns=tuple(p.ignored),
            first_at=_to_datetime(min(first_us)) if first_us else None,
            last_at=_to_datetime(max(last_us)) if last_us else None,
            partitions_written=sum(1 for r in results if r[0] > 0),
        )


def _empty_hourly() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "time": pd.Series([], dtype="datetime64[us, UTC]"),
            "ppm": pd.Series([], dtype="float64"),
            "count": pd.Series([], dtype="int64"),
        }
    )


def _bound(name: str, value: datetime | None) -> int | None:
    if value is None:
        return None
    if value.tzinfo is None:
        raise InputError(name, value.isoformat(), "must be timezone-aware")
    # Timestamp.value is nanoseconds whatever the unit; the store counts microseconds.
    return int(pd.Timestamp(value).value) // 1000


def _write_partition(directory: Path, us: np.ndarray, ppm: np.ndarray) -> tuple[int, int, int]:
    """Merge sorted, unique readings into one month file; (written, already stored, conflicts)."""
    existing = sorted(directory.glob("part-*.parquet")) if directory.is_dir() else []
    already = conflicts = 0
    if existing:
        old = pa.concat_tables([pq.read_table(f, schema=SCHEMA) for f in existing])
        old_us = old.column("time").cast(pa.int64()).to_numpy()
        old_ppm = old.column("ppm").to_numpy()
        if len(existing) > 1 or (len(old_us) > 1 and (np.diff(old_us) <= 0).any()):
            order = np.argsort(old_us, kind="stable")
            old_us, old_ppm = old_us[order], old_ppm[order]
            first = np.concatenate(([True], np.diff(old_us) != 0))
            old_us, old_ppm = old_us[first], old_ppm[first]
        pos = np.searchsorted(old_us, us)
        inside = pos < len(old_us)
        hit = np.zeros(len(us), dtype=bool)
        hit[inside] = old_us[pos[inside]] == us[inside]
        already = int(hit.sum())
        conflicts = int((old_ppm[pos[hit]] != ppm[hit]).sum())
        new_us, new_ppm = us[~hit], ppm[~hit]
        if len(new_us) == 0 and len(existing) == 1:
            return 0, already, conflicts
        all_us = np.concatenate((old_us, new_us))
        all_ppm = np.concatenate((old_ppm, new_ppm))
        order = np.argsort(all_us, kind="stable")
        us_out, ppm_out, written = all_us[order], all_ppm[order], len(new_us)
    else:
        us_out, ppm_out, written = us, ppm, len(us)
    directory.mkdir(parents=True, exist_ok=True)
    table = pa.Table.from_arrays(
        [pa.array(us_out, type=pa.int64()).cast(SCHEMA.field("time").type), pa.array(ppm_out)],
        schema=SCHEMA,
    )
    tmp = directory / f".tmp-{uuid.uuid4().hex}.parquet"
    # Delta-coded times and dictionary-coded ppm: a minute-by-minute month of one channel is
    # a few tens of kilobytes.
    pq.write_table(
        table,
        tmp,
        compression="zstd",
        use_dictionary=["ppm"],
        column_encoding={"time": "DELTA_BINARY_PACKED"},
    )
    target = directory / PART_NAME
    os.replace(tmp, target)
    for f in existing:
        if f != target:
            f.unlink()
    return written, already, conflicts
