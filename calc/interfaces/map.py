"""`relsheet map`: a sheet applied to every row of a table larger than memory.

    relsheet map deflect.sheet --table stars=catalogue.parquet --cells shift -o out.parquet

The sheet reads a (small) table with `read_table`: that table says which columns the sheet
uses and in which units. ``map`` streams another table with those columns — Parquet (a
file or a folder of files), ECSV, FITS or CSV — in chunks of rows, evaluates the sheet on
each chunk through :meth:`calc.engine.sheet.Sheet.chunk_evaluator` (compiled once,
vectorised over the chunk), and writes the chosen cells as Parquet columns: σ as
``NAME_sigma``, units in each field's metadata (``unit``) and in astropy's table metadata,
so that ``astropy.table.QTable.read`` gives them back as Quantities.

Memory stays bounded by the chunk size. Everything that can be refused is refused before
the first chunk: an unknown cell, a table cell not read with `read_table`, a column the
file lacks, a unit that does not convert, an output that exists (without ``--force``).
A row out of a function's domain gets nulls and is counted; checks are judged per chunk.

The local engine reads, evaluates and writes at once (a reader and a writer thread beside
the evaluation, a couple of chunks apart).

``--engine dask`` runs the same per-chunk function on a dask cluster (``--scheduler
ADDRESS``, or a local cluster of two worker threads): dask.dataframe partitions the Parquet
input (whole row groups, about a million rows a partition), ``map_partitions`` evaluates each
partition (in chunks) and writes it as one Parquet file of the output folder, in the input's
order. Workers must see the sheet, its files and the input at the same paths (a shared file
system).
"""

from __future__ import annotations

import json
import os
import shutil
import sys
import tempfile
import time
from collections.abc import Iterator
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path
from typing import Any

import astropy.units as u
import numpy as np

from ..engine.datafiles import column_unit, parquet_units, split_header, table_format
from ..engine.stream import KEPT_ERRORS, CheckTally, ChunkEvaluator, ChunkResult, unit_refusal
from ..errors import InputError, InternalError, SheetError, Source, UsageError
from ..physics.units import close_matches, did_you_mean, unit_string

DEFAULT_CHUNK = 100_000
STREAMED = ("parquet", "ecsv", "fits", "csv")


# ---- what to run ------------------------------------------------------------------------


@dataclass(frozen=True)
class MapSpec:
    """Everything a worker needs to evaluate chunks (plain data: it travels to dask workers)."""

    sheet: str
    root: str | None
    table: str
    cells: tuple[str, ...]
    #: input column → (field name in the sheet, scale into the unit the sheet reads it in)
    columns: tuple[tuple[str, str, float], ...]
    #: field name → unit text the sheet reads it in
    units: tuple[tuple[str, str], ...]
    chunk: int


@dataclass
class Summary:
    rows: int = 0
    failed: int = 0
    errors: list[tuple[int, str]] = field(default_factory=list)
    checks: dict[int, CheckTally] = field(default_factory=dict)

    def add(self, result: ChunkResult, offset: int) -> None:
        self.failed += int(result.failed.sum())
        for row, message in result.errors:
            if len(self.errors) < KEPT_ERRORS:
                self.errors.append((offset + row, message))
        for line, tally in result.checks.items():
            total = self.checks.setdefault(line, CheckTally(line, tally.text))
            total.failed_chunks += tally.failed_chunks
            total.error = total.error or tally.error
            for row, text in tally.rows:
                if len(total.rows) < KEPT_ERRORS:
                    total.rows.append((offset + row, text))
        self.rows += result.rows

    def merge(self, other: Summary) -> None:
        offset = self.rows
        self.failed += other.failed
        self.errors += [(offset + r, m) for r, m in other.errors][:KEPT_ERRORS - len(self.errors)]
        for line, tally in other.checks.items():
            total = self.checks.setdefault(line, CheckTally(line, tally.text))
            total.failed_chunks += tally.failed_chunks
            total.error = total.error or tally.error
            total.rows += [(offset + r, t) for r, t in tally.rows][:KEPT_ERRORS - len(total.rows)]
        self.rows += other.rows


# ---- reading the input in chunks --------------------------------------------------------


class TableStream:
    """A table read chunk by chunk: its columns' units, its row count (None if unknown),
    and chunks of plain float arrays in the file's units."""

    def __init__(self, path: Path, label: str) -> None:
        self.path = path
        self.label = label
        try:
            import pyarrow  # noqa: F401 - every input is read through it
        except ImportError:
            raise UsageError("relsheet map needs pyarrow",
                             hint="pip install 'relsheet[tables]'") from None
        if not path.exists():
            raise InputError(f"no such table: {label}")
        kind = "parquet" if path.is_dir() else table_format(path)
        if kind not in STREAMED:
            raise InputError(f"{label}: relsheet map streams Parquet, ECSV, FITS and CSV tables",
                             hint="convert the table to Parquet")
        self.kind = kind
        #: file column → (sheet field name, unit)
        self.units: dict[str, tuple[str, u.UnitBase]] = {}
        self.rows: int | None = None
        getattr(self, f"_open_{kind}")()

    # -- Parquet: file by file (a folder's files in name order), row group by row group.
    # (pyarrow's dataset scanner reads ahead of a slow consumer, and its memory then grows
    # with the table; a ParquetFile's batches do not.)
    def _open_parquet(self) -> None:
        import pyarrow.parquet as pq

        files = sorted(p for p in self.path.rglob("*.parquet") if p.is_file()) \
            if self.path.is_dir() else [self.path]
        if not files:
            raise InputError(f"{self.label}: the folder holds no .parquet files")
        try:
            self.files = [pq.ParquetFile(f) for f in files]
        except (OSError, ValueError) as exc:
            raise InputError(f"{self.label}: cannot read it as Parquet: {exc}") from None
        for column, (name, unit) in parquet_units(self.files[0].schema_arrow,
                                                  self.label).items():
            if unit is not None:
                self.units[column] = (name, unit)
        self.rows = sum(f.metadata.num_rows for f in self.files)

    def _chunks_parquet(self, columns: list[str], size: int) -> Iterator[dict[str, np.ndarray]]:
        # row group by row group: one reader over a whole file holds on to what it read
        # (its peak memory grew with the file: 156 MB at 10^6 rows, 331 MB at 10^7)
        def batches():
            for each in self.files:
                for group in range(each.metadata.num_row_groups):
                    yield from each.iter_batches(batch_size=size, row_groups=[group],
                                                 columns=columns, use_threads=False)

        yield from _rebatched(batches(), columns, size)

    # -- CSV and ECSV through pyarrow's streaming CSV reader
    def _open_csv(self) -> None:
        skip, header = 0, None
        with open(self.path, encoding="utf-8-sig") as handle:
            for line in handle:
                if line.lstrip().startswith("#") or not line.strip():
                    skip += 1
                    continue
                header = line
                break
        if header is None:
            raise InputError(f"{self.label}: the file is empty")
        import csv

        names = next(csv.reader([header]))
        self.csv_names = names
        self.csv_options = {"skip_rows": skip + 1, "delimiter": ","}
        for column in names:
            name, written = split_header(column)
            from ..engine.datafiles import parse_unit

            self.units[column] = (name, parse_unit(written or "", f"{self.label}, column "
                                                                   f"`{name}`"))

    def _open_ecsv(self) -> None:
        from astropy.table import meta

        lines, skip, names_line = [], 0, None
        with open(self.path, encoding="utf-8") as handle:
            for line in handle:
                if line.startswith("#"):
                    lines.append(line[2:].rstrip("\n") if line.startswith("# ") else "")
                    skip += 1
                    continue
                names_line = line
                break
        try:
            header = meta.get_header_from_yaml(lines[1:])
        except (meta.YamlParseError, IndexError) as exc:
            raise InputError(f"{self.label}: cannot read its ECSV header: {exc}") from None
        delimiter = header.get("delimiter", " ")
        if names_line is None:
            raise InputError(f"{self.label}: the table has no rows")
        self.csv_names = names_line.split(delimiter) if delimiter != " " else names_line.split()
        self.csv_options = {"skip_rows": skip + 1, "delimiter": delimiter}
        for column in header.get("datatype", []):
            if column.get("datatype", "float64").startswith(("float", "int", "uint")):
                self.units[column["name"]] = (column["name"], column_unit(
                    column.get("unit"), f"{self.label}, column `{column['name']}`"))

    def _chunks_csv(self, columns: list[str], size: int) -> Iterator[dict[str, np.ndarray]]:
        import pyarrow as pa
        import pyarrow.csv as pcsv

        reader = pcsv.open_csv(
            self.path,
            read_options=pcsv.ReadOptions(skip_rows=self.csv_options["skip_rows"],
                                          column_names=self.csv_names,
                                          block_size=max(1 << 16, size * 24)),
            parse_options=pcsv.ParseOptions(delimiter=self.csv_options["delimiter"]),
            convert_options=pcsv.ConvertOptions(include_columns=columns,
                                                column_types={c: pa.float64() for c in columns}))
        try:
            yield from _rebatched(reader, columns, size)
        except pa.ArrowInvalid as exc:
            raise InputError(f"{self.label}: {exc}") from None

    # -- FITS, memory-mapped: a slice reads only its rows
    def _open_fits(self) -> None:
        from astropy.io import fits

        self.fits = fits.open(self.path, memmap=True)
        tables = [h for h in self.fits if isinstance(h, fits.BinTableHDU)]
        if not tables:
            raise InputError(f"{self.label}: the FITS file has no binary table")
        self.hdu = tables[0]
        for column in self.hdu.columns:
            if column.format.recformat[-2:] in ("f8", "f4", "i8", "i4", "i2", "u1") or \
                    column.format.recformat[-2:].startswith(("f", "i")):
                self.units[column.name] = (column.name, column_unit(
                    column.unit, f"{self.label}, column `{column.name}`"))
        self.rows = self.hdu.header.get("NAXIS2")

    def _chunks_fits(self, columns: list[str], size: int) -> Iterator[dict[str, np.ndarray]]:
        data = self.hdu.data
        for start in range(0, self.rows or 0, size):
            part = data[start:start + size]
            yield {c: np.asarray(part[c], dtype=float) for c in columns}

    def chunks(self, columns: list[str], size: int) -> Iterator[dict[str, np.ndarray]]:
        kind = "csv" if self.kind == "ecsv" else self.kind
        return getattr(self, f"_chunks_{kind}")(columns, size)


def _rebatched(batches, columns: list[str], size: int) -> Iterator[dict[str, np.ndarray]]:
    """Record batches of any lengths as chunks of ``size`` rows (the last one shorter)."""
    import pyarrow as pa

    pending: list = []
    held = 0
    for batch in batches:
        if batch.num_rows == size and not pending:   # the common case: as it comes
            yield {c: _floats(batch.column(c)) for c in columns}
            continue
        pending.append(batch)
        held += batch.num_rows
        while held >= size:
            table = pa.Table.from_batches(pending)
            yield {c: _floats(table.column(c).slice(0, size)) for c in columns}
            rest = table.slice(size)
            pending, held = rest.to_batches(), rest.num_rows
    if held:
        table = pa.Table.from_batches(pending)
        yield {c: _floats(table.column(c)) for c in columns}


def _floats(column) -> np.ndarray:
    """A pyarrow column as float64 (nulls as NaN: such rows fail and are counted)."""
    import pyarrow as pa
    import pyarrow.compute as pc

    if column.null_count:
        column = pc.fill_null(column.cast(pa.float64()), float("nan"))
    return np.asarray(column.to_numpy(), dtype=float)


# ---- planning: everything refused before the first chunk -----------------------------------


def load_sheet(spec_sheet: str, root: str | None):
    from ..engine.sheet import Sheet

    return Sheet.load(spec_sheet, root=root)


def plan(args) -> tuple[Any, MapSpec, TableStream, ChunkEvaluator]:
    from ..language.syntax import Call

    table, sep, table_path = args.table.partition("=")
    if not sep or not table or not table_path:
        raise UsageError(f"--table takes NAME=PATH, got `{args.table}`",
                         hint="for example --table stars=catalogue.parquet")
    cells = [c.strip() for c in args.cells.split(",") if c.strip()]
    if not cells:
        raise UsageError("--cells names at least one cell")
    if args.chunk < 1:
        raise UsageError(f"--chunk must be at least 1, got {args.chunk}")
    output = Path(args.output)
    if output.exists() and not args.force:
        raise UsageError(f"{args.output} exists; nothing written",
                         hint="pass --force to replace it")
    sheet = load_sheet(args.sheet, args.root)
    for name in (table, *cells):
        if name not in sheet:
            raise UsageError(f"the sheet has no cell `{name}`",
                             hint=did_you_mean(close_matches(name, sheet.names())))
    definition = sheet.file_definition(table)
    if definition is None or not isinstance(definition.expr, Call) or \
            definition.expr.function != "read_table":
        span = definition.span if definition is not None else None
        raise InputError(f"`{table}` is not read with read_table, so relsheet map has no "
                         "table to replace", span, source=sheet.source,
                         hint=f'write `{table} = read_table("sample.ecsv")` with a sample '
                              "of the table's columns")
    evaluator = sheet.chunk_evaluator(table, cells)
    if any(sheet.cell(n).error is not None for n in (table, *evaluator.order, *cells)):
        raise SheetErrors(sheet)
    for name in cells:
        if name not in evaluator.units:
            raise UsageError(f"`{name}` is a record, not a column of numbers",
                             hint="choose cells that hold one value a row")
    sample = sheet.raw(table)
    stream = TableStream(Path(table_path), table_path)
    by_name = {name: (column, unit) for column, (name, unit) in stream.units.items()}
    wanted = evaluator.fields if evaluator.fields is not None else set(sample.fields)
    columns: list[tuple[str, str, float]] = []
    units: list[tuple[str, str]] = []
    for name in sorted(wanted, key=list(sample.fields).index):
        expected = sample.field(name).unit
        if name not in by_name:
            raise InputError(f"{table_path} has no column `{name}`, which the sheet reads as "
                             f"`{table}.{name}`", hint=did_you_mean(close_matches(
                                 name, list(by_name))) or f"its columns are {', '.join(by_name)}")
        column, unit = by_name[name]
        refusal = unit_refusal(name, unit, expected)
        if refusal is not None:
            raise InputError(f"{table_path}: {refusal}")
        from ..physics.units import conversion_scale

        columns.append((column, name, conversion_scale(unit, expected)))
        units.append((name, unit_string(expected)))
    spec = MapSpec(str(Path(args.sheet).resolve()), args.root, table, tuple(cells),
                   tuple(columns), tuple(units), args.chunk)
    return sheet, spec, stream, evaluator


class SheetErrors(Exception):
    """The sheet cannot be mapped: the cells it needs have errors (printed by the caller)."""

    def __init__(self, sheet) -> None:
        super().__init__("the sheet has errors")
        self.sheet = sheet


# ---- evaluating and writing --------------------------------------------------------------


def quantities(spec: MapSpec, chunk: dict[str, np.ndarray]) -> dict[str, u.Quantity]:
    units = dict(spec.units)
    out = {}
    for column, name, scale in spec.columns:
        values = chunk[column]
        out[name] = u.Quantity(values * scale if scale != 1.0 else values, units[name],
                               copy=False)
    return out


def output_schema(spec: MapSpec, evaluator: ChunkEvaluator):
    """The output's Parquet schema: one float column a cell (and σ), units in metadata."""
    import pyarrow as pa
    from astropy.table import QTable, meta

    fields, empty = [], QTable()
    for name in spec.cells:
        unit = evaluator.units[name]
        names = [name] + ([f"{name}_sigma"] if evaluator.uncertain[name] else [])
        for column in names:
            fields.append(pa.field(column, pa.float64(),
                                   metadata={b"unit": unit_string(unit).encode()}))
            empty[column] = u.Quantity(np.zeros(0), unit)
    units = {f.name: f.metadata[b"unit"].decode() for f in fields}
    metadata = {b"table_meta_yaml": "\n".join(meta.get_yaml_from_table(empty)).encode(),
                b"relsheet": json.dumps({"sheet": spec.sheet, "table": spec.table,
                                         "units": units}).encode()}
    return pa.schema(fields, metadata=metadata)


def batch_of(result: ChunkResult, spec: MapSpec, schema):
    import pyarrow as pa

    arrays = []
    for name in spec.cells:
        arrays.append(pa.array(result.values[name], mask=result.failed))
        if name in result.sigmas:
            arrays.append(pa.array(result.sigmas[name], mask=result.failed))
    return pa.record_batch(arrays, schema=schema)


def temporary_beside(target: Path) -> Path:
    """A temporary name beside ``target`` that atomic writes clean up if left behind."""
    handle, name = tempfile.mkstemp(prefix=f".{target.name}.relsheet-{os.getpid()}-",
                                    suffix=".tmp", dir=target.parent)
    os.close(handle)
    return Path(name)


def put_in_place(temporary: Path, target: Path) -> None:
    """Move a finished file or folder onto ``target`` (a folder there is replaced whole)."""
    if target.is_dir() and not target.is_symlink():
        old = temporary.with_name(temporary.name + ".old")
        os.replace(target, old)
        os.replace(temporary, target)
        shutil.rmtree(old, ignore_errors=True)
    else:
        os.replace(temporary, target)


class Progress:
    """Rows done and rows per second on a terminal's stderr (nothing when not a terminal)."""

    def __init__(self, total: int | None) -> None:
        self.total = total
        self.start = time.monotonic()
        self.shown = sys.stderr.isatty()
        self.last = 0.0

    def __call__(self, done: int) -> None:
        if not self.shown:
            return
        now = time.monotonic()
        if now - self.last < 0.2 and done != self.total:
            return
        self.last = now
        rate = done / max(now - self.start, 1e-9)
        if self.total:
            width = 30
            filled = int(width * done / self.total)
            text = (f"\r[{'#' * filled}{'.' * (width - filled)}] {done:,}/{self.total:,} rows "
                    f"{rate:,.0f} rows/s")
        else:
            text = f"\r{done:,} rows  {rate:,.0f} rows/s"
        sys.stderr.write(text)
        sys.stderr.flush()

    def close(self) -> None:
        if self.shown:
            sys.stderr.write("\n")


class _Stopped(Exception):
    """The other side of a pipeline's hand-over gave up (its error is the one raised)."""


class _Pipeline:
    """Reading, evaluating and writing chunks at once: the reader and the writer are
    threads (pyarrow reads and writes Parquet without holding the GIL), each a couple of
    chunks ahead or behind, so a run costs about its slowest stage rather than the sum of
    the three. At most ``DEPTH`` chunks wait at each hand-over: memory stays bounded by
    the chunk size. The first error of either thread ends the run and is raised in the
    calling thread; ``stop`` ends and joins both threads."""

    DEPTH = 2

    def __init__(self) -> None:
        import threading

        self.stopping = threading.Event()
        self.failure: BaseException | None = None
        self._threads: list[threading.Thread] = []

    def _thread(self, target, name: str) -> None:
        import threading

        thread = threading.Thread(target=target, name=f"relsheet-map-{name}", daemon=True)
        self._threads.append(thread)
        thread.start()

    def _fail(self, exc: BaseException) -> None:
        self.failure = self.failure or exc
        self.stopping.set()

    def _put(self, channel, item) -> None:
        import queue

        while not self.stopping.is_set():
            try:
                channel.put(item, timeout=0.1)
                return
            except queue.Full:
                continue
        raise _Stopped()

    def _get(self, channel):
        import queue

        while True:
            try:
                return channel.get(timeout=0.1)
            except queue.Empty:
                if self.stopping.is_set():
                    raise _Stopped() from None

    def read_ahead(self, chunks: Iterator[dict[str, np.ndarray]]) -> Iterator[dict]:
        """``chunks`` produced by a thread, DEPTH ahead of the consumer."""
        import queue

        channel: queue.Queue = queue.Queue(self.DEPTH)
        end = object()

        def produce() -> None:
            try:
                for chunk in chunks:
                    self._put(channel, chunk)
                self._put(channel, end)
            except _Stopped:
                return
            except BaseException as exc:   # raised in the consumer's thread
                self._fail(exc)

        self._thread(produce, "read")
        while True:
            chunk = self._get(channel)
            if chunk is end:
                return
            yield chunk

    def write_behind(self, write) -> tuple[Any, Any]:
        """A thread calling ``write(item)`` for each item handed to the returned ``give``;
        ``finish()`` waits for the last write."""
        import queue

        channel: queue.Queue = queue.Queue(self.DEPTH)
        end = object()

        def consume() -> None:
            try:
                while (item := self._get(channel)) is not end:
                    write(item)
            except _Stopped:
                return
            except BaseException as exc:   # raised in the producer's thread
                self._fail(exc)

        self._thread(consume, "write")

        def finish() -> None:
            self._put(channel, end)
            self.join()

        return (lambda item: self._put(channel, item)), finish

    def join(self) -> None:
        for thread in self._threads:
            thread.join()

    def stop(self) -> None:
        """End both threads, their work abandoned, and wait for them (the file they write
        is closed only after)."""
        self.stopping.set()
        self.join()


def run_local(spec: MapSpec, stream: TableStream, evaluator: ChunkEvaluator,
              output: Path) -> Summary:
    import pyarrow.parquet as pq

    schema = output_schema(spec, evaluator)
    temporary = temporary_beside(output)
    summary = Summary()
    progress = Progress(stream.rows)
    pipeline = _Pipeline()
    try:
        with pq.ParquetWriter(temporary, schema) as writer:
            give, finish = pipeline.write_behind(writer.write_batch)
            try:
                chunks = stream.chunks([c for c, _, _ in spec.columns], spec.chunk)
                for chunk in pipeline.read_ahead(chunks):
                    rows = len(next(iter(chunk.values()))) if chunk else 0
                    result = evaluator.chunk(quantities(spec, chunk), rows)
                    give(batch_of(result, spec, schema))
                    summary.add(result, summary.rows)
                    progress(summary.rows)
                finish()
            except _Stopped:   # a thread failed: its error is raised below
                pass
            finally:
                pipeline.stop()
            if pipeline.failure is not None:
                raise pipeline.failure
        put_in_place(temporary, output)
    except BaseException:
        temporary.unlink(missing_ok=True)
        raise
    finally:
        progress.close()
    return summary


# ---- dask -----------------------------------------------------------------------------


@lru_cache(maxsize=8)
def _worker_evaluator(spec: MapSpec) -> tuple[ChunkEvaluator, Any, Any]:
    """A worker's compiled sheet and output schema, made once per worker process, with a
    lock: a sheet's evaluation context is not shared by two threads at once (workers of a
    local cluster without processes are threads of one process)."""
    import threading

    sheet = load_sheet(spec.sheet, spec.root)
    evaluator = sheet.chunk_evaluator(spec.table, list(spec.cells))
    return evaluator, threading.Lock(), output_schema(spec, evaluator)


def _without_dask() -> UsageError:
    return UsageError("--engine dask needs dask and distributed",
                      hint="pip install 'relsheet[cluster]'")


class LocalClusterStart:
    """A local dask cluster of two workers, started in a thread while the command compiles
    the sheet and checks the table. The workers are threads of this process: on one
    machine that saves starting processes and moving chunks between them, and the heavy
    parts of a chunk (reading, arithmetic on arrays, writing) run without the GIL. A
    cluster of processes or machines is given with ``--scheduler``."""

    def __init__(self) -> None:
        import threading

        self.cluster: Any = None
        self.failure: BaseException | None = None
        self._thread = threading.Thread(target=self._start, name="relsheet-map-cluster",
                                        daemon=True)
        self._thread.start()

    def _start(self) -> None:
        try:
            from distributed import LocalCluster

            self.cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                        dashboard_address=":0")
        except ImportError:
            self.failure = _without_dask()
        except BaseException as exc:
            self.failure = exc

    def result(self) -> Any:
        self._thread.join()
        if self.failure is not None:
            raise self.failure
        return self.cluster

    def close(self) -> None:
        self._thread.join()
        if self.cluster is not None:
            self.cluster.close()
            self.cluster = None


#: rows a dask partition holds, about (whole row groups of the input)
PARTITION_ROWS = 1_000_000


def row_groups_per_partition(stream: TableStream) -> int:
    """Whole row groups to about PARTITION_ROWS rows: a partition's memory does not grow
    with the table, and there are few enough partitions for the scheduler's cost per task
    to stay small."""
    metadata = stream.files[0].metadata
    group_rows = metadata.row_group(0).num_rows if metadata.num_row_groups else 0
    return max(1, PARTITION_ROWS // max(group_rows, 1))


def map_partition(frame, spec: MapSpec, folder: str, partition_info: dict | None = None):
    """One dask partition (a pandas DataFrame of the input's columns): evaluated in chunks
    of ``spec.chunk`` rows and written as ``part.NUMBER.parquet`` in ``folder``; returns a
    one-row frame holding its summary (rows counted from the partition's start)."""
    import pandas as pd
    import pyarrow.parquet as pq

    summary = Summary()
    if partition_info is None:   # dask's look at an empty frame, to learn the output's form
        return pd.DataFrame({"summary": pd.Series([summary], dtype=object)})
    evaluator, lock, schema = _worker_evaluator(spec)
    path = Path(folder) / f"part.{partition_info['number']:05d}.parquet"
    columns = {c: frame[c].to_numpy(dtype=float, na_value=np.nan) for c, _, _ in spec.columns}
    rows = len(frame)
    with pq.ParquetWriter(path, schema) as writer:
        for start in range(0, max(rows, 1), spec.chunk):
            stop = min(start + spec.chunk, rows)
            chunk = {c: values[start:stop] for c, values in columns.items()}
            with lock:   # the evaluation only: the other worker reads and writes meanwhile
                result = evaluator.chunk(quantities(spec, chunk), stop - start)
            writer.write_batch(batch_of(result, spec, schema))
            summary.add(result, summary.rows)
    return pd.DataFrame({"summary": pd.Series([summary], dtype=object)})


def run_dask(spec: MapSpec, stream: TableStream, evaluator: ChunkEvaluator, output: Path,
             scheduler: str | None, starting: LocalClusterStart | None = None) -> Summary:
    if stream.kind != "parquet":
        raise UsageError("--engine dask reads Parquet input (a file or a folder of files)",
                         hint="convert the table to Parquet, or use --engine local")
    try:
        import dask.dataframe as dd
        import pandas as pd
        from distributed import Client
    except ImportError:
        raise _without_dask() from None
    temporary = temporary_beside(output)
    temporary.unlink()
    temporary.mkdir()
    if scheduler is None and starting is None:
        starting = LocalClusterStart()
    try:
        if scheduler is None:
            assert starting is not None
            client = Client(starting.result())
        else:
            client = Client(scheduler)
        with client:
            frame = dd.read_parquet(str(stream.path), columns=[c for c, _, _ in spec.columns],
                                    split_row_groups=row_groups_per_partition(stream))
            meta = pd.DataFrame({"summary": pd.Series([], dtype=object)})
            summaries = frame.map_partitions(map_partition, spec, str(temporary),
                                             meta=meta).compute()["summary"]
        summary = Summary()
        for part in summaries:
            summary.merge(part)
        put_in_place(temporary, output)
    except BaseException:
        shutil.rmtree(temporary, ignore_errors=True)
        raise
    finally:
        if starting is not None:
            starting.close()
    return summary


# ---- the command -------------------------------------------------------------------------


def report(summary: Summary, spec: MapSpec, output: Path, seconds: float) -> None:
    rate = summary.rows / max(seconds, 1e-9)
    print(f"{summary.rows:,} rows → {output} ({', '.join(spec.cells)}) in {seconds:.1f} s "
          f"({rate:,.0f} rows/s)")
    if summary.failed:
        print(f"{summary.failed:,} row{'s' if summary.failed != 1 else ''} failed (null in "
              "the output); rows count from 0; the first:", file=sys.stderr)
        for row, message in summary.errors:
            print(f"  row {row:,}: {message}", file=sys.stderr)
    passed = sum(t.passed for t in summary.checks.values())
    failed = len(summary.checks) - passed
    if summary.checks:
        print(f"checks: {passed} passed, {failed} failed")
    for line, tally in sorted(summary.checks.items()):
        if tally.passed:
            continue
        if tally.error:
            print(f"{spec.sheet}:{line}: check could not be judged: {tally.error}",
                  file=sys.stderr)
            continue
        rows = ", ".join(f"{r:,}" for r, _ in tally.rows)
        print(f"{Path(spec.sheet).name}:{line}: FAILED {tally.text} in {tally.failed_chunks:,} "
              f"chunk{'s' if tally.failed_chunks != 1 else ''}; first failing rows: {rows}")


def cmd_map(args) -> int:
    starting = None
    if args.engine == "dask" and args.scheduler is None and \
            (args.force or not Path(args.output).exists()):
        # started now, it is ready about when the sheet is compiled and the table checked
        starting = LocalClusterStart()
    try:
        return _map(args, starting)
    finally:
        if starting is not None:
            starting.close()


def _map(args, starting: LocalClusterStart | None) -> int:
    from .cli import EXIT_CHECK_FAILED, EXIT_INTERNAL, EXIT_OK, EXIT_SHEET_ERRORS

    started = time.monotonic()
    try:
        sheet, spec, stream, evaluator = plan(args)
    except SheetErrors as err:
        errors = err.sheet.all_errors()
        for problem in errors:
            print(problem.render(), file=sys.stderr)
        print(f"{len(errors)} error{'s' if len(errors) != 1 else ''}; nothing mapped",
              file=sys.stderr)
        return EXIT_INTERNAL if err.sheet.internal_errors() else EXIT_SHEET_ERRORS
    output = Path(args.output)
    try:
        if args.engine == "dask":
            summary = run_dask(spec, stream, evaluator, output, args.scheduler,
                               starting=starting)
        else:
            if args.scheduler is not None:
                raise UsageError("--scheduler goes with --engine dask")
            summary = run_local(spec, stream, evaluator, output)
    except SheetError:
        raise
    except OSError as exc:
        raise InputError(f"{args.output}: {exc.strerror or exc}",
                         source=Source(args.output, "")) from None
    except Exception as exc:   # a bug of ours (exit 70)
        raise InternalError.wrapping(exc, "mapping the table") from exc
    report(summary, spec, output, time.monotonic() - started)
    if summary.failed:
        return EXIT_SHEET_ERRORS
    if any(not t.passed for t in summary.checks.values()):
        return EXIT_CHECK_FAILED
    return EXIT_OK
