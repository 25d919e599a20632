"""relsheet's on-disk cache: data only, kept where only the user can write, checked on load.

Two things are cached under ``$XDG_CACHE_HOME/relsheet`` (``~/.cache/relsheet``):
the analysed grammar (lark's parse tables, which take a quarter of a second to
compute) and the statements of sheets already parsed (so that an unchanged
sheet skips the parser). Both are stored as JSON and read back by code that
builds only known kinds of objects from it (:mod:`calc.language.serial`, and
lark's own table deserialiser for the grammar): loading an entry never runs
code named in it, unlike pickle.

Nobody else may change what an entry means, so before anything in the folder
is trusted:

* the folder must be a real directory (not a symbolic link) owned by the user
  and closed to everyone else (mode 0700; a folder of ours that is open is
  closed and its key replaced, since others may have read it);
* every file must be a regular file owned by the user with mode 0600, opened
  without following links;
* every entry carries a keyed BLAKE2b MAC (RFC 7693; BLAKE2's keyed mode is a
  MAC by design, needing no HMAC construction) over what it stands for (the
  digest of the text it was parsed from, or of the grammar) and its contents,
  keyed by a random key kept in the folder (0600). The key is bound to the key
  file's own identity (device, inode, change time), so a folder copied in from
  elsewhere — a cache committed to a repository and checked out with a
  restrictive umask — does not verify here.

An entry that fails any check is ignored (and replaced on the next write).
Entries are written to a temporary file and renamed into place, so a reader
never sees half an entry. ``RELSHEET_CACHE=off`` turns the cache off (every
sheet is parsed, the grammar analysed at every start).
"""

from __future__ import annotations

import os
import stat
import tempfile
import time
from pathlib import Path

try:
    # The C module behind hashlib.blake2b, taken directly: `import hashlib` first loads
    # OpenSSL, which cost 4-7 ms of a 0.55 s `relsheet eval` here; BLAKE2 needs none of it.
    from _blake2 import blake2b
except ImportError:  # pragma: no cover - an interpreter without the module
    from hashlib import blake2b
try:
    # hmac.compare_digest's own constant-time comparison, without hmac's OpenSSL import
    from _operator import _compare_digest as compare_digest
except ImportError:  # pragma: no cover
    from hmac import compare_digest  # type: ignore[no-redef]

#: Set to "off" (or 0, no, false) to run without the on-disk cache.
SWITCH = "RELSHEET_CACHE"

#: The key file's name in the cache folder.
KEY_FILE = "key"

#: Entries larger than this are not read (a cache entry of a sheet within the 8 MB limit is
#: far smaller).
MAX_ENTRY_BYTES = 64 * 2**20

_HEADER = b"relsheet-cache 2 "  # 2: BLAKE2b MACs (1: HMAC-SHA256)
_PRIVATE = 0o077  # permission bits nobody but the owner may have


def enabled() -> bool:
    return os.environ.get(SWITCH, "").strip().lower() not in ("off", "0", "no", "false")


def folder_path() -> Path:
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "relsheet"


class Store:
    """The verified cache folder and its key; :func:`open_store` makes one (or None)."""

    def __init__(self, folder: Path, key: bytes) -> None:
        self.folder = folder
        self._key = key

    def _mac(self, kind: str, subject: bytes, payload: bytes) -> bytes:
        mac = blake2b(kind.encode() + b"\0" + subject + b"\0", key=self._key)
        mac.update(payload)
        return mac.hexdigest().encode("ascii")

    def read(self, name: str, kind: str, subject: bytes) -> bytes | None:
        """The payload of entry ``name`` if it is ours and stands for ``subject``; else None."""
        data = _read_private(self.folder / name)
        if data is None or not data.startswith(_HEADER):
            return None
        end = data.find(b"\n")
        if end < 0:
            return None
        mac, payload = data[len(_HEADER):end], data[end + 1:]
        if not compare_digest(mac, self._mac(kind, subject, payload)):
            return None
        return payload

    def write(self, name: str, kind: str, subject: bytes, payload: bytes) -> None:
        """Store ``payload`` as entry ``name`` (atomically; failures are ignored: it is a
        cache)."""
        data = _HEADER + self._mac(kind, subject, payload) + b"\n" + payload
        _write_private(self.folder / name, data)

    def touch(self, name: str) -> None:
        """Mark entry ``name`` as recently used (pruning keeps it longer)."""
        try:
            os.utime(self.folder / name, follow_symlinks=False)
        except OSError:
            pass

    def prune(self, prefix: str, keep: int) -> None:
        """Keep the ``keep`` most recently used entries whose names start with ``prefix``,
        and remove temporary files a killed process left behind."""
        try:
            names = os.listdir(self.folder)
        except OSError:
            return
        mine = [n for n in names if n.startswith(prefix)]
        stale = [n for n in names if n.startswith(".tmp-")]
        if len(mine) <= keep and not stale:
            return
        dated = []
        for name in mine + stale:
            try:
                info = os.lstat(self.folder / name)
            except OSError:
                continue
            if name in stale:
                if info.st_mtime < time.time() - 3600:
                    _unlink(self.folder / name)
            else:
                dated.append((info.st_mtime, name))
        dated.sort(reverse=True)
        for _, name in dated[keep:]:
            _unlink(self.folder / name)


def _unlink(path: Path) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


def open_store() -> Store | None:
    """The cache folder, created if need be, with its key; None when the cache is off or the
    folder cannot be trusted (not ours) or used (read-only home)."""
    if not enabled() or not hasattr(os, "getuid") or not hasattr(os, "O_NOFOLLOW"):
        return None  # off, or a system where ownership and links cannot be checked this way
    folder = folder_path()
    try:
        folder.mkdir(mode=0o700, parents=True, exist_ok=True)
        info = os.lstat(folder)
        if not stat.S_ISDIR(info.st_mode) or info.st_uid != os.getuid():
            return None  # a link, or someone else's folder: nothing in it is trusted
        rotate = False
        if info.st_mode & _PRIVATE:
            # ours but open to others: close it; anything others could read is replaced
            os.chmod(folder, 0o700)
            rotate = True
        key = None if rotate else _read_key(folder)
        if key is None:
            _write_private(folder / KEY_FILE, os.urandom(32), raise_errors=True)
            key = _read_key(folder)
            if key is None:
                return None
        return Store(folder, key)
    except OSError:
        return None


def _read_key(folder: Path) -> bytes | None:
    """The MAC key: the key file's random bytes bound to that file's identity."""
    path = folder / KEY_FILE
    try:
        fd = os.open(path, os.O_RDONLY | os.O_NOFOLLOW | os.O_CLOEXEC)
    except OSError:
        return None
    try:
        info = os.fstat(fd)
        if not _private_file(info) or info.st_size != 32:
            return None
        secret = os.read(fd, 33)
    finally:
        os.close(fd)
    if len(secret) != 32:
        return None
    identity = f"{info.st_dev}:{info.st_ino}:{info.st_ctime_ns}".encode()
    return blake2b(identity, key=secret, digest_size=32).digest()


def _private_file(info: os.stat_result) -> bool:
    return stat.S_ISREG(info.st_mode) and info.st_uid == os.getuid() \
        and not info.st_mode & _PRIVATE


def _read_private(path: Path) -> bytes | None:
    try:
        fd = os.open(path, os.O_RDONLY | os.O_NOFOLLOW | os.O_CLOEXEC)
    except OSError:
        return None
    try:
        info = os.fstat(fd)
        if not _private_file(info) or info.st_size > MAX_ENTRY_BYTES:
            return None
        chunks = []
        remaining = info.st_size + 1
        while remaining > 0:
            chunk = os.read(fd, remaining)
            if not chunk:
                break
            chunks.append(chunk)
            remaining -= len(chunk)
        data = b"".join(chunks)
        return data if len(data) <= MAX_ENTRY_BYTES else None
    except OSError:
        return None
    finally:
        os.close(fd)


def _write_private(path: Path, data: bytes, raise_errors: bool = False) -> None:
    """Write ``data`` to ``path`` (0600) through a temporary file renamed into place."""
    temporary = None
    try:
        fd, temporary = tempfile.mkstemp(prefix=".tmp-", dir=path.parent)  # mode 0600
        with os.fdopen(fd, "wb") as out:
            out.write(data)
        os.replace(temporary, path)
        temporary = None
    except OSError:
        if raise_errors:
            raise
    finally:
        if temporary is not None:
            try:
                os.unlink(temporary)
            except OSError:
                pass


# ---- what is cached ---------------------------------------------------------------------


def digest(*parts: bytes) -> str:
    h = blake2b(digest_size=32)
    for part in parts:
        h.update(len(part).to_bytes(8, "little"))
        h.update(part)
    return h.hexdigest()


def load(store: Store | None, kind: str, subject: str) -> bytes | None:
    """The payload cached for ``subject`` (a digest naming what it stands for), or None."""
    if store is None:
        return None
    name = f"{kind}-{subject[:32]}.json"
    payload = store.read(name, kind, subject.encode("ascii"))
    if payload is not None:
        store.touch(name)
    return payload


def save(store: Store | None, kind: str, subject: str, payload: bytes, keep: int) -> None:
    """Cache ``payload`` for ``subject``, keeping the ``keep`` most recent entries of its kind."""
    if store is None:
        return
    store.write(f"{kind}-{subject[:32]}.json", kind, subject.encode("ascii"), payload)
    store.prune(f"{kind}-", keep)
