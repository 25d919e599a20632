"""Reading sheet files: size limit, UTF-8 with exact positions of bad bytes."""

from __future__ import annotations

import os
import re
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


def read_sheet(path: str | Path, label: str | None = None) -> Source:
    """Read a sheet file; a missing or unreadable file is an InputError. The size is checked
    before reading, and no more than the limit (plus one byte) is ever read, so a huge file
    or a device such as /dev/zero is refused at once. ``label`` names it in messages (default:
    the path as given)."""
    data = read_limited(path, MAX_SHEET_BYTES, "sheet")
    source = decode_sheet(data, label or str(path))
    return Source(source.label, source.text, Path(path).resolve())


def label_in(path: Path, root: Path) -> str:
    """A file's name for messages: relative to the project root when it lies inside it."""
    try:
        return path.relative_to(root).as_posix()
    except ValueError:
        return str(path)


def read_limited(path: str | Path, limit: int, what: str) -> bytes:
    """The bytes of a file of at most ``limit`` bytes (InputError otherwise, or when it cannot
    be read)."""
    label = str(path)
    try:
        with open(path, "rb") as handle:
            size = os.fstat(handle.fileno()).st_size
            if size > limit:
                raise InputError(f"the {what} is {size:,} bytes; the limit is {limit:,}",
                                 hint="split it into several sheets" if what == "sheet" else None,
                                 source=Source(label, ""))
            data = handle.read(limit + 1)
    except FileNotFoundError:
        raise InputError(f"no such {what}: {label}", source=Source(label, "")) from None
    except IsADirectoryError:
        raise InputError(f"{label} is a folder, not a {what}", source=Source(label, "")) from None
    except OSError as exc:
        raise InputError(f"cannot read {label}: {exc.strerror or exc}",
                         source=Source(label, "")) from None
    if len(data) > limit:
        raise InputError(f"the {what} is larger than the limit of {limit:,} bytes",
                         source=Source(label, ""))
    return data


def cache_folder() -> Path:
    """relsheet's folder in the user's cache ($XDG_CACHE_HOME/relsheet, else ~/.cache/relsheet):
    analysed grammars, prompt history. Nothing in it is needed to get the right numbers."""
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "relsheet"


#: Temporary files of atomic writes: `.NAME.relsheet-PID-RANDOM.tmp` beside the target.
_TEMPORARY = re.compile(r"^\.(?P<name>.+)\.relsheet-(?P<pid>\d+)-[^.]+\.tmp$")


def _remove_leftovers(folder: Path, name: str) -> None:
    """Temporary files that a killed relsheet left beside ``name`` (their process is gone)."""
    try:
        entries = list(folder.iterdir())
    except OSError:
        return
    for entry in entries:
        match = _TEMPORARY.match(entry.name)
        if match is None or match["name"] != name:
            continue
        pid = int(match["pid"])
        if pid != os.getpid() and _alive(pid):
            continue
        try:
            entry.unlink()
        except OSError:
            pass


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:
        return True
    return True


def atomic_write(path: str | Path, data: bytes, *, expected: bytes | None = None,
                 force: bool = False) -> None:
    """Replace ``path`` with ``data`` so that a crash leaves the old file or the new one,
    never half of either: a temporary file in the same folder, fsync, then rename.

    A symbolic link is written through (its target is replaced, the link stays). A read-only
    file is refused unless ``force``. With ``expected`` (the bytes the file had when relsheet
    read it), a file that another program changed meanwhile is refused, and nothing is
    written. A new file gets the permissions the umask allows, as any program's would.
    Temporary files that a killed relsheet left behind are removed at the next write.
    """
    import tempfile

    given = Path(path)
    target = Path(os.path.realpath(given))
    folder = target.parent
    label = str(given)
    if target.is_dir():
        raise InputError(f"cannot write {label}: it is a folder", hint="name a file",
                         source=Source(label, ""))
    exists = target.exists()
    # read-only to its owner means read-only (even to an administrator, who could write it)
    if exists and not force and not target.stat().st_mode & 0o200:
        raise InputError(f"{label} is read-only; nothing written",
                         hint="make it writable, or pass --force to replace it",
                         source=Source(label, ""))
    _remove_leftovers(folder, target.name)
    try:
        mode = target.stat().st_mode & 0o7777 if exists else _new_file_mode()
        handle, temporary = tempfile.mkstemp(
            prefix=f".{target.name}.relsheet-{os.getpid()}-", suffix=".tmp", dir=folder)
    except OSError as exc:
        raise InputError(f"cannot write {label}: {exc.strerror or exc}",
                         source=Source(label, "")) from None
    try:
        with os.fdopen(handle, "wb") as out:
            out.write(data)
            out.flush()
            os.fsync(out.fileno())
        os.chmod(temporary, mode)
        if expected is not None:
            try:
                now = target.read_bytes() if exists else None
            except OSError:
                now = None
            if now != expected:
                raise InputError(f"{label} changed on disk while relsheet was working; "
                                 "nothing written", hint="run the command again",
                                 source=Source(label, ""))
        os.replace(temporary, target)
    except OSError as exc:
        _discard(temporary)
        raise InputError(f"cannot write {label}: {exc.strerror or exc}",
                         source=Source(label, "")) from None
    except BaseException:
        _discard(temporary)
        raise
    try:  # make the rename itself durable
        directory = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(directory)
        finally:
            os.close(directory)
    except OSError:
        pass


def _discard(temporary: str) -> None:
    try:
        os.unlink(temporary)
    except FileNotFoundError:
        pass


def _new_file_mode() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


#: Deepest chain of imports (a sheet importing a sheet importing …).
MAX_IMPORT_DEPTH = 64


def resolve_import(importer: Path | None, written: str, root: Path, chain: tuple[Path, ...],
                   span) -> Path:
    """The file a `use "…"` line names: relative to the importing sheet, a `.sheet` file
    inside the project root, not already on the chain of imports."""
    if not written.endswith(".sheet"):
        raise InputError(f"`{written}` is not a sheet: only .sheet files can be imported", span,
                         hint="name a file ending in .sheet")
    if len(chain) >= MAX_IMPORT_DEPTH:
        raise InputError(f"imports are nested more than {MAX_IMPORT_DEPTH} deep", span,
                         hint="import shared sheets from the top sheet instead")
    base = importer if importer is not None else Path.cwd()
    try:
        path = (base / written).resolve()
        path.relative_to(root)
    except ValueError:
        raise InputError(f"`{written}` lies outside the project root {_shown_folder(root)}",
                         span, hint="keep shared sheets below the top sheet's folder, or pass "
                                    "--root") from None
    except OSError as exc:
        raise InputError(f"cannot use `{_clipped(written)}`: {exc.strerror or exc}", span) \
            from None
    if path in chain:
        names = " → ".join(p.name for p in (*chain[chain.index(path):], path))
        raise InputError(f"import cycle: {names}", span, hint="a sheet cannot import itself, "
                         "directly or through others")
    try:
        found = path.is_file()
    except OSError as exc:
        raise InputError(f"cannot use `{_clipped(written)}`: {exc.strerror or exc}", span) \
            from None
    if not found:
        raise InputError(f"no such sheet: {_clipped(written)} (looked for "
                         f"{label_in(path, root)})", span)
    return path


def resolve_data_file(folder: Path | None, written: str, root: Path | None, span) -> Path:
    """The file a `read_table("…")` call names: relative to the sheet's folder, inside the
    project root (as imports are)."""
    base = folder if folder is not None else Path.cwd()
    top = root if root is not None else base.resolve()
    try:
        path = (base / written).resolve()
        path.relative_to(top)
    except ValueError:
        raise InputError(f"`{_clipped(written)}` lies outside the project root "
                         f"{_shown_folder(top)}", span,
                         hint="keep data files below the top sheet's folder, or pass --root") \
            from None
    except OSError as exc:
        raise InputError(f"cannot read `{_clipped(written)}`: {exc.strerror or exc}", span) \
            from None
    if not path.is_file():
        raise InputError(f"no such data file: {_clipped(written)} (looked for "
                         f"{label_in(path, top)})", span)
    return path


def _clipped(text: str, limit: int = 80) -> str:
    return text if len(text) <= limit else text[:limit - 1] + "…"


def _shown_folder(folder: Path) -> str:
    """A folder for messages: relative to the working folder when it lies below it."""
    try:
        return folder.relative_to(Path.cwd()).as_posix() or "."
    except ValueError:
        return str(folder)
