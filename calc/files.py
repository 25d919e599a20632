"""Reading sheet files: size limit, UTF-8 with exact positions of bad bytes."""

from __future__ import annotations

from pathlib import Path

from .errors import InputError, Source, Span

#: Larger files are refused before parsing (a sheet is hand-written text).
MAX_SHEET_BYTES = 8 * 1024 * 1024


def decode_sheet(data: bytes, label: str) -> Source:
    """Bytes of a sheet as text; invalid UTF-8 is an error at the line and column of the byte."""
    if len(data) > MAX_SHEET_BYTES:
        raise InputError(f"the sheet is {len(data):,} bytes; the limit is {MAX_SHEET_BYTES:,}",
                         None, hint="split it into several sheets", source=Source(label, ""))
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        good = data[:exc.start].decode("utf-8", errors="replace")
        line = good.count("\n") + 1
        column = len(good) - (good.rfind("\n") + 1) + 1
        shown = data.decode("utf-8", errors="replace")
        raise InputError(f"invalid UTF-8: byte 0x{data[exc.start]:02x} cannot start or continue "
                         "a character", Span(line, column, line, column + 1),
                         hint="save the sheet as UTF-8", source=Source(label, shown)) from None
    if "\x00" in text:
        at = text.index("\x00")
        line = text.count("\n", 0, at) + 1
        column = at - (text.rfind("\n", 0, at) + 1) + 1
        raise InputError("the sheet contains a NUL character (is it a binary file?)",
                         Span(line, column, line, column + 1), source=Source(label, text))
    return Source(label, text)


def read_sheet(path: str | Path) -> Source:
    """Read a sheet file; a missing or unreadable file is an InputError."""
    label = str(path)
    try:
        data = Path(path).read_bytes()
    except FileNotFoundError:
        raise InputError(f"no such sheet: {label}", source=Source(label, "")) from None
    except IsADirectoryError:
        raise InputError(f"{label} is a folder, not a sheet", source=Source(label, "")) from None
    except OSError as exc:
        raise InputError(f"cannot read {label}: {exc.strerror}", source=Source(label, "")) from None
    return decode_sheet(data, label)


def cache_folder() -> Path:
    """relsheet's folder in the user's cache ($XDG_CACHE_HOME/relsheet, else ~/.cache/relsheet):
    analysed grammars, prompt history. Nothing in it is needed to get the right numbers."""
    import os

    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "relsheet"


def atomic_write(path: str | Path, data: bytes) -> None:
    """Replace ``path`` with ``data`` so that a crash leaves the old file or the new one,
    never half of either: a temporary file in the same folder, fsync, then rename."""
    import os
    import tempfile

    target = Path(path)
    folder = target.parent
    try:
        mode = target.stat().st_mode if target.exists() else None
        handle, temporary = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
    except OSError as exc:
        raise InputError(f"cannot write {target}: {exc.strerror}",
                         source=Source(str(target), "")) from None
    try:
        with os.fdopen(handle, "wb") as out:
            out.write(data)
            out.flush()
            os.fsync(out.fileno())
        if mode is not None:
            os.chmod(temporary, mode & 0o7777)
        os.replace(temporary, target)
    except BaseException:
        try:
            os.unlink(temporary)
        except FileNotFoundError:
            pass
        raise
    try:  # make the rename itself durable
        directory = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(directory)
        finally:
            os.close(directory)
    except OSError:
        pass


def resolve_import(importer: str, written: str, root: Path, chain: tuple[Path, ...],
                   span) -> Path:
    """The file a `use "…"` line names: relative to the importing sheet, a `.sheet` file
    inside the project root, not already on the chain of imports."""
    from .errors import InputError as Refused

    if not written.endswith(".sheet"):
        raise Refused(f"`{written}` is not a sheet: only .sheet files can be imported", span,
                      hint="name a file ending in .sheet")
    base = Path(importer).resolve().parent if importer and not importer.startswith("<") \
        else Path.cwd()
    path = (base / written).resolve()
    try:
        path.relative_to(root)
    except ValueError:
        raise Refused(f"`{written}` lies outside the project root {root}", span,
                      hint="keep shared sheets below the top sheet's folder, or pass --root") \
            from None
    if path in chain:
        names = " → ".join(p.name for p in (*chain[chain.index(path):], path))
        raise Refused(f"import cycle: {names}", span, hint="a sheet cannot import itself, "
                      "directly or through others")
    if not path.is_file():
        raise Refused(f"no such sheet: {written} (looked for {path})", span)
    return path
