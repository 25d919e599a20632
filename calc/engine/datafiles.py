"""Data files as values: `obs = read_table("passes.ecsv")`.

A data file becomes a record (kind ``table``) of columns, each column a 1-D
Quantity with the unit the file gives it. Formats, told by the file's suffix:

* ECSV (``.ecsv``), FITS binary tables (``.fits``, ``.fit``, ``.fits.gz``) and VOTable
  (``.vot``, ``.votable``, ``.xml``), read through astropy.table: units come from the
  file. Columns of text (star names) are left out of the record: they are not numbers.
* CSV (``.csv``) whose header names each column as ``name [unit]`` (``flux [mJy]``,
  ``b [AU]``, ``ratio []`` for a plain number). A column written without ``[unit]`` is a
  plain number only when every value in it is a number; a column of text is left out; a
  header that gives no unit at all is refused (a table of physical values states them).
  Lines starting with ``#`` before the header are notes. Every row must have as many
  values as the header has names.
* Parquet (``.parquet``), read through pyarrow: units from astropy's metadata, a column's
  own ``unit`` metadata, or a ``name [unit]`` column name.

Paths are relative to the sheet's folder and must stay inside the project root, as the
sheets `use` imports (:func:`calc.files.resolve_data_file`). Every problem with a file is
an :class:`~calc.errors.InputError` that names the file, and the row and column where it
has one; the compiler puts it at the cell's line, under the file name.

``relsheet map`` streams large tables chunk by chunk with the same header and unit rules
(:func:`column_unit`, :func:`split_header`), so a table means the same in both places.
"""

from __future__ import annotations

import csv
import math
import re
import warnings
from collections.abc import Iterable, Sequence
from pathlib import Path

import astropy.units as u
import numpy as np

from ..errors import InputError, NameResolutionError, SheetError, Span
from ..files import resolve_data_file
from ..physics.constants import default_selection
from ..physics.records import Record
from ..physics.units import EXTRA_UNITS, REFUSED_UNITS, did_you_mean, unit_table

#: the record kind of a table read from a file
TABLE_KIND = "table"

#: file suffix → format name
FORMATS = {
    ".ecsv": "ecsv", ".fits": "fits", ".fit": "fits", ".fits.gz": "fits", ".vot": "votable",
    ".votable": "votable", ".xml": "votable", ".csv": "csv", ".parquet": "parquet",
}

_HEADER = re.compile(r"^\s*(?P<name>[^\[\]]*?)\s*(\[(?P<unit>[^\[\]]*)\])?\s*$")
_UNIT_NAME = re.compile(r"[^\W\d][\w]*")


def table_format(path: Path) -> str | None:
    """The format of a data file by its suffix (None: not one relsheet reads)."""
    name = path.name.lower()
    for suffix in sorted(FORMATS, key=len, reverse=True):
        if name.endswith(suffix):
            return FORMATS[suffix]
    return None


def supported_suffixes() -> str:
    return ", ".join(sorted(FORMATS))


# ---- units ------------------------------------------------------------------------------


def parse_unit(text: str, where: str) -> u.UnitBase:
    """A unit written in a file's header (`km / s`, `mas / century`, empty for a plain
    number). Unknown names get a did-you-mean; ``where`` says where the unit was written."""
    text = text.strip()
    if not text:
        return u.dimensionless_unscaled
    table = unit_table(default_selection())
    for name in _UNIT_NAME.findall(text):
        if name in REFUSED_UNITS:
            reason, hint = REFUSED_UNITS[name]
            raise InputError(f"{where}: {reason}", hint=hint)
        if table.lookup(name) is None:
            raise InputError(f"{where}: unknown unit `{name}`",
                             hint=did_you_mean(table.suggestions(name))
                             or "`relsheet units` lists the units")
    try:
        with u.add_enabled_units(list(EXTRA_UNITS.values())):
            return u.Unit(text, format="generic", parse_strict="raise")
    except ValueError:
        raise InputError(f"{where}: cannot read the unit `{text}`",
                         hint="write it as `km / s`, `m s^-2` or `mas / century`") from None


def column_unit(unit, where: str) -> u.UnitBase:
    """The unit astropy gives a column (None: a plain number); a unit astropy did not
    recognise in the file is refused with a did-you-mean."""
    if unit is None:
        return u.dimensionless_unscaled
    if isinstance(unit, u.UnrecognizedUnit):
        return parse_unit(str(unit), where)
    if isinstance(unit, str):
        return parse_unit(unit, where)
    return unit


def split_header(text: str) -> tuple[str, str | None]:
    """`flux [mJy]` → ("flux", "mJy"); `flux` → ("flux", None); `ratio []` → ("ratio", "")."""
    match = _HEADER.match(text)
    if match is None:
        return text.strip(), None
    return match["name"], match["unit"]


# ---- the record -------------------------------------------------------------------------


def on_table_axis(columns: dict[str, u.Quantity], cell: str | None = None,
                  rank: float = 0.0) -> Record:
    """The value of a cell that reads a table: a record of its columns.

    This is the one place where a table's columns become a value. Each column is a 1-D
    Quantity, one element per row; given the ``cell`` (and its ``rank``, its place in the file),
    the rows are an axis named after it, so that `max(obs.flux, along = obs)` and a grid of the
    rows against another axis work like any axis.
    """
    if cell is None:
        return Record(TABLE_KIND, columns, cell)
    from .grid import Axis, Grid

    placed = {}
    for name, column in columns.items():
        rows = int(np.shape(column.value)[0]) if np.ndim(column.value) else 1
        placed[name] = Grid(column, (Axis(cell, rank, rows),)) if np.ndim(column.value) == 1 \
            else column
    return Record(TABLE_KIND, placed, cell)


def read_table(path: Path, label: str) -> Record:
    """The columns of a data file as a record; InputError naming ``label`` (the file as
    the sheet wrote it) and the row and column of any problem."""
    kind = table_format(path)
    if kind is None:
        raise InputError(f"{label}: relsheet reads no tables of this format",
                         hint=f"use a file ending in {supported_suffixes()}")
    if not path.is_file():
        raise InputError(f"no such data file: {label}")
    if kind == "csv":
        return on_table_axis(read_csv(path, label))
    if kind == "parquet":
        return on_table_axis(read_parquet(path, label))
    return on_table_axis(read_astropy(path, label, kind))


def read_astropy(path: Path, label: str, kind: str) -> dict[str, u.Quantity]:
    from astropy.table import Table

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")   # unrecognised units are refused below
            table = Table.read(path, format={"ecsv": "ascii.ecsv", "fits": "fits",
                                             "votable": "votable"}[kind])
    except (OSError, ValueError, TypeError, KeyError, IndexError) as exc:
        raise InputError(f"{label}: cannot read it as {kind.upper()}: {exc}") from None
    columns: dict[str, u.Quantity] = {}
    for name in table.colnames:
        column = table[name]
        where = f"{label}, column `{name}`"
        if column.dtype.kind not in "biuf":
            continue   # text, dates as text, booleans: not quantities
        if column.ndim != 1:
            raise InputError(f"{where} holds {column.shape[1]} values a row; relsheet "
                             "reads one value a row")
        unit = column_unit(column.unit, where)
        data = np.asarray(column, dtype=float)
        mask = getattr(column, "mask", None)
        if mask is not None and np.any(mask):
            row = int(np.argmax(np.asarray(mask)))
            raise InputError(f"{where}, row {row + 1}: the value is missing",
                             hint="fill it in or drop the row")
        columns[name] = u.Quantity(data, unit, copy=False)
    return _checked_columns(columns, label)


def read_parquet(path: Path, label: str) -> dict[str, u.Quantity]:
    try:
        import pyarrow.parquet as pq
    except ImportError:
        raise InputError(f"{label}: reading Parquet needs pyarrow",
                         hint="pip install 'relsheet[tables]'") from None

    try:
        table = pq.read_table(path)
    except (OSError, ValueError) as exc:
        raise InputError(f"{label}: cannot read it as Parquet: {exc}") from None
    units = parquet_units(table.schema, label)
    columns: dict[str, u.Quantity] = {}
    for field, column in zip(table.schema, table.columns):
        name, unit = units.get(field.name, (field.name, None))
        if unit is None:
            continue
        if column.null_count:
            row = int(np.argmax(np.asarray(column.is_null())))
            raise InputError(f"{label}, column `{name}`, row {row + 1}: the value is missing",
                             hint="fill it in or drop the row")
        columns[name] = u.Quantity(column.to_numpy().astype(float, copy=False), unit, copy=False)
    return _checked_columns(columns, label)


def parquet_units(schema, label: str) -> dict[str, tuple[str, u.UnitBase | None]]:
    """For each Parquet column: the name a sheet uses and its unit (None: not numeric),
    from astropy's table metadata, the field's own ``unit`` metadata, or `name [unit]`."""
    import pyarrow as pa

    from_astropy: dict[str, str] = {}
    metadata = schema.metadata or {}
    yaml_text = metadata.get(b"table_meta_yaml")
    if yaml_text is not None:
        from astropy.table import meta

        try:
            header = meta.get_header_from_yaml(yaml_text.decode("utf-8").splitlines())
            for column in header.get("datatype", []):
                if column.get("unit") is not None:
                    from_astropy[column["name"]] = str(column["unit"])
        except (meta.YamlParseError, UnicodeDecodeError, AttributeError, TypeError):
            pass
    found: dict[str, tuple[str, u.UnitBase | None]] = {}
    for field in schema:
        name, written = split_header(field.name)
        own = (field.metadata or {}).get(b"unit")
        if own is not None:
            written = own.decode("utf-8", errors="replace")
        written = from_astropy.get(field.name, written)
        numeric = pa.types.is_integer(field.type) or pa.types.is_floating(field.type)
        if not numeric:
            found[field.name] = (name, None)
            continue
        where = f"{label}, column `{name}`"
        found[field.name] = (name, parse_unit(written or "", where))
    return found


def _checked_columns(columns: dict[str, u.Quantity], label: str) -> dict[str, u.Quantity]:
    if not columns:
        raise InputError(f"{label}: the table has no numeric columns")
    lengths = {len(c) for c in columns.values()}
    if 0 in lengths:
        raise InputError(f"{label}: the table has no rows")
    return columns


# ---- CSV ----------------------------------------------------------------------------------


def read_csv(path: Path, label: str) -> dict[str, u.Quantity]:
    """A CSV whose header reads `name [unit]` (see the module's notes)."""
    try:
        with open(path, encoding="utf-8-sig", newline="") as handle:
            return parse_csv(handle, label)
    except UnicodeDecodeError:
        raise InputError(f"{label}: not UTF-8 text", hint="save the table as UTF-8") from None
    except OSError as exc:
        raise InputError(f"cannot read {label}: {exc.strerror or exc}") from None


def parse_csv(lines: Iterable[str], label: str) -> dict[str, u.Quantity]:
    """The columns of CSV text (lines as read from a file)."""
    reader = csv.reader(lines)
    header: list[str] | None = None
    header_line = 0
    rows: list[tuple[int, list[str]]] = []
    try:
        for row in reader:
            line = reader.line_num
            if header is None:
                if not row or not "".join(row).strip() or row[0].lstrip().startswith("#"):
                    continue
                header, header_line = row, line
                continue
            if not row or (len(row) == 1 and not row[0].strip()):
                continue   # a blank line
            if len(row) != len(header):
                raise InputError(f"{label}, line {line} (row {len(rows) + 1}): {len(row)} "
                                 f"value{'s' if len(row) != 1 else ''} for {len(header)} "
                                 "columns", hint="every row needs one value for each column "
                                                 "of the header")
            rows.append((line, row))
    except csv.Error as exc:
        raise InputError(f"{label}, line {reader.line_num}: {exc}") from None
    if header is None:
        raise InputError(f"{label}: the file is empty", hint="the first line names the columns "
                                                               "as `name [unit]`")
    names_units = [split_header(text) for text in header]
    if all(unit is None for _, unit in names_units):
        raise InputError(f"{label}, line {header_line}: the header gives no units",
                         hint="name each column as `name [unit]`, such as `b [AU]`; "
                              "`ratio []` is a plain number")
    seen: set[str] = set()
    for name, _ in names_units:
        if not name:
            raise InputError(f"{label}, line {header_line}: a column has no name")
        if name in seen:
            raise InputError(f"{label}, line {header_line}: two columns are called `{name}`")
        seen.add(name)
    if not rows:
        raise InputError(f"{label}: the table has no rows")
    columns: dict[str, u.Quantity] = {}
    for index, (name, written) in enumerate(names_units):
        where = f"{label}, column `{name}`"
        unit = parse_unit(written, where) if written is not None else None
        values = _numbers([row[index] for _, row in rows])
        if isinstance(values, int):
            bad = values
            if written is None and all(_number(row[index]) is None for _, row in rows):
                continue   # a column of text (names): not a quantity
            line, row = rows[bad]
            cell = row[index].strip()
            what = "is empty" if not cell else f"`{_clip(cell)}` is not a number"
            raise InputError(f"{label}, line {line} (row {bad + 1}), column `{name}`: {what}",
                             hint="a column without `[unit]` must hold only numbers"
                             if written is None else None)
        columns[name] = u.Quantity(values, unit if unit is not None else
                                   u.dimensionless_unscaled, copy=False)
    return columns


def _number(text: str) -> float | None:
    try:
        value = float(text.replace("\u2212", "-"))
    except ValueError:
        return None
    return value if math.isfinite(value) or text.strip().lower() in ("inf", "-inf", "+inf") \
        else None


def _numbers(cells: Sequence[str]) -> np.ndarray | int:
    """The cells as floats, or the index of the first cell that is not a number."""
    out = np.empty(len(cells))
    for index, text in enumerate(cells):
        value = _number(text)
        if value is None:
            return index
        out[index] = value
    return out


def _clip(text: str, limit: int = 40) -> str:
    return text if len(text) <= limit else text[:limit - 1] + "…"



# ---- the call in a sheet ----------------------------------------------------------------


def read_table_call(function_span: Span, args: Sequence, keywords: Sequence, span: Span,
                    folder: Path | None, root: Path | None) -> Record:
    """`read_table("file")` as a sheet writes it: one quoted file name, relative to the
    sheet's ``folder``, inside ``root``. Errors carry the span of the file name (or of the
    call when the arguments are wrong)."""
    from ..language.syntax import TextLiteral

    if keywords or len(args) != 1 or not isinstance(args[0], TextLiteral):
        raise NameResolutionError("read_table takes one file name in quotes", span,
                                  hint='for example read_table("passes.ecsv")')
    written = args[0]
    try:
        path = resolve_data_file(folder, written.text, root, written.span)
        return read_table(path, written.text)
    except SheetError as err:
        raise err.located(written.span) from None
