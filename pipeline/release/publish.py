"""Publishing a release: one build at a time, all files or none, readers isolated.

An output folder (``curated/``) is a *release home*, and nothing else is ever written:

```
curated/
  .lock                  held by the build writing here (fcntl.flock)
  .staging-<pid>/        the release being written (removed on failure)
  releases/<id>/         immutable complete releases; <id> = first 16 hex digits of the
                         sha256 of the release's manifest.json, so equal builds share one
  current -> releases/<id>
  library.json -> current/library.json     one link per top-level entry of the release
  report -> current/report                 ...
```

A build writes each file of its release into the staging folder as soon as it is made
(``Release``: a large release is never held in memory whole), checks it against its own
manifest,
renames it to ``releases/<id>`` and then swaps ``current`` to it with one atomic rename of
a link. A build killed at any moment leaves ``current`` at the complete previous release or
the complete new one. Readers that resolve ``current`` once (``thermoledger.library.load``
does) read one release, never files of two: the previous release stays in place until the
next build, so a reader that resolved it just before a swap still finds every file.

What may be replaced is checked before any work (``vet_output_folder``): the folder must be
absent, empty, or a release home (recognised by its own manifest, not by its name); a
folder holding a release written flat by an earlier version is taken over when every file
in it is listed in its manifest. The output may not be, contain or lie inside a raw folder,
the working directory, a filesystem root or the home folder, also through a link.
"""

import hashlib
import os
import re
import shutil
import signal
import time
from contextlib import contextmanager
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

from ..core import paths
from ..core.errors import OutputError
from ..core.lazy import Derived
from ..library.document import CURRENT

LOCK = ".lock"
STORE = ".parts"   # the partitions of the last build (partitions.PartStore)
RELEASES = "releases"
_STAGING = re.compile(r"^\.staging-\d+$")
_RELEASE_ID = re.compile(r"^[0-9a-f]{16}$")
#: releases kept in releases/: the current one and the one before it (for readers in flight)
KEEP_RELEASES = 2
#: files every release holds besides those its manifest lists
_SELF = ("manifest.json", "datapackage.json")


def _is_inside(a: Path, b: Path) -> bool:
    """True when ``a`` is ``b`` or lies below it (both resolved)."""
    return a == b or b in a.parents


#: how a manifest written by a build (release/document.json_chunks: two-space indentation)
#: begins
MANIFEST_HEAD = b'{\n  "manifest_format": 1,\n'


def manifest_outputs(path: Path):
    """The "outputs" of the thermoledger manifest at ``path`` (manifest_format 1 with a list
    of outputs), else None. Read up to the end of that list when the file begins as a
    build writes it (``listed``: at 100 000 species the manifest is some 300 MB, its
    outputs a few lines near the top; the data package holds the manifest's own sha256),
    else whole (orjson)."""
    import orjson

    try:
        items = listed(path, "outputs", MANIFEST_HEAD)
        if items is not None:
            try:
                return list(items)
            except ValueError:
                pass                    # not laid out an object a line: read it whole
        doc = orjson.loads(Path(path).read_bytes())
    except (OSError, ValueError):
        return None
    if isinstance(doc, dict) and doc.get("manifest_format") == 1 and isinstance(
            doc.get("outputs"), list):
        return doc["outputs"]
    return None


#: how document.json_chunks ends an object that is an item of a top-level list
_ITEM_END = b"\n    }"
_BLOCK = 1 << 22


def listed(path: Path, key: str, head: bytes = b"{\n"):
    """An iterator over the items of the top-level list ``key`` of the JSON document at
    ``path``, read in blocks and one item at a time (at 100 000 species a manifest lists
    some 100 000 outputs and the data package as many resources), when the file begins with
    ``head`` and lays the list out as document.json_chunks writes it (each item an object);
    else None (read it whole). An item that does not read as JSON raises ValueError."""
    import orjson

    opening = b'\n  "' + key.encode() + b'": ['
    fh = open(path, "rb")
    try:
        buf = fh.read(len(head))
        if buf == head:
            while (at := buf.find(opening)) < 0:
                more = fh.read(_BLOCK)
                if not more:
                    break
                buf = buf[-len(opening):] + more
            else:
                return _items(fh, buf[at + len(opening):], orjson.loads)
        fh.close()
        return None
    except BaseException:
        fh.close()
        raise


def _items(fh, buf: bytes, loads):
    """The objects of a list from just after its ``[`` (see ``listed``); closes ``fh``."""
    with fh:
        at = 0
        while True:
            if buf.startswith((b"]", b"\n  ]"), at):
                return
            end = buf.find(_ITEM_END, at)
            if end < 0:
                more = fh.read(_BLOCK)
                if not more:
                    raise ValueError(f"{fh.name}: a list ends without its closing bracket")
                buf, at = buf[at:] + more, 0
                continue
            end += len(_ITEM_END)
            yield loads(buf[at:end].lstrip(b",\n "))
            at = end


def _is_manifest(path: Path) -> bool:
    """True when ``path`` holds a thermoledger manifest (``manifest_outputs``), remembered for the
    file as it is once settled (core.paths.identity, settled): a build judges
    its release home twice, before and under the lock, and the manifests of the kept
    releases, which never change, were read in full each time (0.2 s per judgement at
    10 000 species)."""
    try:
        st = path.stat()
    except OSError:
        return False
    if not paths.settled(st):
        return manifest_outputs(path) is not None
    return _recognised(str(path), *paths.identity(st))


@lru_cache(maxsize=64)
def _recognised(path: str, *identity) -> bool:
    return manifest_outputs(Path(path)) is not None


def _flat_release_files(folder: Path):
    """Relative paths of a release written flat into ``folder`` by an earlier version, or
    None when the folder holds anything its manifest does not list."""
    outputs = manifest_outputs(folder / "manifest.json")
    if outputs is None:
        return None
    listed = {o.get("path") for o in outputs if isinstance(o, dict)} | set(_SELF)
    found = set()
    for p in folder.rglob("*"):
        rel = p.relative_to(folder).as_posix()
        if rel == LOCK:
            continue
        if p.is_symlink() or (not p.is_dir() and rel not in listed):
            return None
        if p.is_file():
            found.add(rel)
    return found


def _unknown_entries(folder: Path) -> list:
    """Entries of a release home that thermoledger did not create."""
    out = []
    for entry in folder.iterdir():
        name = entry.name
        if name in (LOCK, RELEASES, CURRENT, STORE) or _STAGING.match(name):
            continue
        if name.startswith(".current-") or name.startswith(".link-"):
            continue
        if entry.is_symlink() and os.readlink(entry) == f"{CURRENT}/{name}":
            continue
        out.append(name)
    return sorted(out)


def _is_home(folder: Path) -> bool:
    """Only entries thermoledger makes, every release with its own manifest, and ``current``
    (when present) a link to one of them."""
    if _unknown_entries(folder):
        return False
    home = folder / RELEASES
    if home.exists() and (home.is_symlink() or not home.is_dir() or not all(
            _RELEASE_ID.match(p.name) and _is_manifest(p / "manifest.json")
            for p in home.iterdir())):
        return False
    cur = folder / CURRENT
    if cur.is_symlink():
        return re.fullmatch(rf"{RELEASES}/[0-9a-f]{{16}}", os.readlink(cur)) is not None
    return not cur.exists()


def kind_of(folder: Path) -> str:
    """'absent', 'empty', 'home' (a release home), 'flat' (an earlier flat release) or
    'other'."""
    if not folder.exists() and not folder.is_symlink():
        return "absent"
    if not folder.is_dir():
        return "other"
    entries = [e.name for e in folder.iterdir()]
    if all(e in (LOCK, STORE) or _STAGING.match(e) for e in entries):
        return "empty"     # nothing, or a first build at work in it (under its lock)
    if (folder / CURRENT).is_symlink() or (folder / RELEASES).is_dir():
        return "home" if _is_home(folder) else "other"
    if _flat_release_files(folder) is not None:
        return "flat"
    return "other"


def vet_output_folder(out, raw_dirs=()) -> Path:
    """The resolved output folder, after refusing anything but a release home (OutputError
    naming the folder and why). Nothing is written."""
    given = Path(out)
    real = given.resolve()
    why = None
    cwd, home = Path.cwd().resolve(), Path.home().resolve()
    for raw in raw_dirs:
        raw = Path(raw).resolve()
        if _is_inside(real, raw) or _is_inside(raw, real):
            why = f"it is, contains or lies inside the raw folder {raw}"
    if real == Path(real.anchor):
        why = "it is a filesystem root"
    elif real == cwd or _is_inside(cwd, real):
        why = "it is or contains the working directory"
    elif real == home or _is_inside(home, real):
        why = "it is or contains the home folder"
    if why is None:
        kind = kind_of(real)
        if kind == "other":
            if real.exists() and not real.is_dir():
                why = "it exists and is not a folder"
            else:
                why = ("it holds files that are not a thermoledger release (no manifest of its "
                       "own lists them); choose an empty or new folder")
    if why:
        link = f" (a link to {real})" if given.is_symlink() else ""
        raise OutputError(f"refusing to write into {given}{link}: {why}")
    return real


@contextmanager
def locked(target: Path, wait: float = 0.0):
    """Hold the lock of the release home ``target`` (created when absent) for the block.
    When this call created the folder and the block published nothing, the folder is
    removed again."""
    import fcntl  # POSIX only: imported where the lock is taken, not when the module loads

    target = Path(target)
    created = not target.exists()
    target.mkdir(parents=True, exist_ok=True)
    lock_path = target / LOCK
    fd = os.open(lock_path, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        deadline = time.monotonic() + max(wait, 0.0)
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() >= deadline:
                    raise OutputError(f"another build is writing {target} (lock {lock_path}); "
                                      "run again when it has finished, or give --wait "
                                      "SECONDS") from None
                time.sleep(0.05)
        _recover(target)
        yield target
    finally:
        if created and [e.name for e in target.iterdir()] == [LOCK]:
            os.unlink(lock_path)
            os.rmdir(target)
        os.close(fd)  # closing releases the lock


def _recover(target: Path):
    """Remove staging folders and half-made links of killed builds (names we create)."""
    for p in target.iterdir():
        if _STAGING.match(p.name) and p.is_dir() and not p.is_symlink():
            shutil.rmtree(p, ignore_errors=True)
        elif p.name.startswith((".current-", ".link-")) and p.is_symlink():
            p.unlink()


def _link(target: Path, name: str, points_to: str):
    """Make ``target/name`` a link to ``points_to`` atomically (a new link renamed over)."""
    path = target / name
    if path.is_symlink() and os.readlink(path) == points_to:
        return
    tmp = target / f".link-{os.getpid()}-{name}"
    if tmp.is_symlink():
        tmp.unlink()
    os.symlink(points_to, tmp)
    os.replace(tmp, path)


@dataclass(frozen=True)
class Staging:
    """The staging folder of a Release, as another process writes into it (``write``); the
    Release takes the files in with ``adopt``."""

    folder: Path

    def write(self, rel: str, data: bytes) -> bytes:
        """Write new file ``rel`` (refused when the folder already holds it: a file is never
        written twice, nor through a link); its sha256 and size, as Release keeps them."""
        return self.write_chunks(rel, (data,))

    def write_chunks(self, rel: str, chunks) -> bytes:
        """``write`` of the byte pieces ``chunks``, each written as it comes."""
        return write_summed(self.folder / rel, chunks, "xb")


def summed(sha256: bytes, size: int) -> bytes:
    """A file's sha256 (32 bytes) and size as a Release keeps them: 40 bytes."""
    return sha256 + size.to_bytes(8, "big")


def write_summed(path: Path, chunks, mode: str = "wb") -> bytes:
    """Write the byte pieces ``chunks`` into file ``path`` (opened in ``mode``; its folder
    made), each as it comes; its sha256 and size (``summed``). Not fsynced: a staged release
    is made durable all at once (``Release.sync``); the kernel is asked to start writing it
    out now (core.paths.start_writeback), while the release goes on."""
    path.parent.mkdir(parents=True, exist_ok=True)
    digest, size = hashlib.sha256(), 0
    with open(path, mode) as fh:
        for chunk in chunks:
            digest.update(chunk)
            size += len(chunk)
            fh.write(chunk)
        fh.flush()
        paths.start_writeback(fh.fileno())
    return summed(digest.digest(), size)


def _between(chunks, call):
    """The pieces ``chunks``, ``call()`` made after each is taken."""
    for chunk in chunks:
        yield chunk
        call()


class Release:
    """The files of a release as they are made, each with its sha256 and size: written at
    once into the staging folder of a locked release home (``Release.staged``), or kept in
    memory (``Release()``, a build that publishes nothing)."""

    def __init__(self, folder: Path | None = None, flat=None):
        self.folder = folder
        self.flat = flat           # files of a flat release in the home, to take over
        self._kept = {} if folder is None else None
        self._sums = {}
        #: called after each piece written by ``add_chunks`` when set (what else the build
        #: does meanwhile: the report's drawing, release.report.Drawing.pump)
        self.between = None

    @classmethod
    def staged(cls, target: Path) -> "Release":
        """A release written into ``target``/.staging-<pid> (``target`` locked; what it
        holds is judged before the staging folder is made)."""
        target = Path(target)
        kind = kind_of(target)
        if kind == "other":
            raise OutputError(f"refusing to write into {target}: it is not a release home")
        flat = _flat_release_files(target) if kind == "flat" else None
        staging = target / f".staging-{os.getpid()}"
        shutil.rmtree(staging, ignore_errors=True)
        staging.mkdir()
        return cls(staging, flat)

    def add(self, rel: str, data: bytes) -> None:
        self.add_chunks(rel, (data,))

    def add_chunks(self, rel: str, chunks) -> None:
        """File ``rel`` of the byte pieces ``chunks``, written as they come (a large file is
        never held whole); its sha256 and size are taken on the way."""
        if self._kept is not None:
            data = self._kept[rel] = b"".join(chunks)
            self._sums[rel] = summed(hashlib.sha256(data).digest(), len(data))
            return
        path = self.folder / rel
        if rel in self._sums:              # never written through a link (``link``)
            path.unlink(missing_ok=True)
        if self.between is not None:
            chunks = _between(chunks, self.between)
        self._sums[rel] = write_summed(path, chunks)

    def sync(self) -> None:
        """Make every file written into the staging folder durable (core.paths.sync_files),
        before the release is renamed into place."""
        if self._kept is None:
            paths.sync_files(self.folder, sorted(self._sums))

    def staging(self):
        """The Staging other processes write this release's new files into (``adopt``), or
        None when the release is kept in memory."""
        return None if self._kept is not None else Staging(self.folder)

    def adopt(self, rel: str, summed: bytes) -> None:
        """Take in file ``rel``, written into the staging folder by ``Staging.write``, which
        gave ``summed`` (its sha256 and size)."""
        if rel in self._sums:
            raise OutputError(f"{rel} was written twice into the release")
        self._sums[rel] = summed

    def link(self, rel: str, source: Path, sha256: str, size: int) -> bool:
        """File ``rel`` as a hard link to ``source`` (a file of an earlier release, never
        changed in place; its bytes when the release is kept in memory or no link can be
        made) when ``source`` holds ``size`` bytes of sha256 ``sha256`` (read to check);
        False, nothing added, when it does not or cannot be read."""
        try:
            data = Path(source).read_bytes()
        except OSError:
            return False
        if len(data) != size or hashlib.sha256(data).hexdigest() != sha256:
            return False
        if self._kept is not None:
            self._kept[rel] = data
        else:
            path = self.folder / rel
            path.parent.mkdir(parents=True, exist_ok=True)
            if rel in self._sums:              # the staging folder holds only what was added
                path.unlink(missing_ok=True)
            try:
                os.link(source, path)
            except OSError:
                self.add(rel, data)
                return True
        self._sums[rel] = summed(bytes.fromhex(sha256), size)
        return True

    def update(self, files: dict) -> None:
        for rel, data in files.items():
            self.add(rel, data)

    def outputs(self) -> Derived:
        """[(relative path, sha256, size)] of the files so far, sorted by path, each made
        when read (with the report, a build of 100 000 species writes some 200 000 files;
        each is held as 40 bytes of sha256 and size)."""
        return Derived(sorted(self._sums), self._output)

    def _output(self, rel: str) -> tuple:
        packed = self._sums[rel]
        return rel, packed[:32].hex(), int.from_bytes(packed[32:], "big")

    def sha256(self, rel: str) -> str:
        """The sha256 (hex) of file ``rel``."""
        return self._sums[rel][:32].hex()

    def summary(self, rel: str) -> tuple:
        """(sha256 in hex, size) of file ``rel``."""
        return self._output(rel)[1:]

    def get(self, rel: str, default=None):
        """The bytes of file ``rel`` (read back from disk when written), else ``default``."""
        if rel not in self._sums:
            return default
        return self._kept[rel] if self._kept is not None else (self.folder / rel).read_bytes()

    def __contains__(self, rel) -> bool:
        return rel in self._sums

    def __iter__(self):
        return iter(sorted(self._sums))

    def __len__(self) -> int:
        return len(self._sums)

    def discard(self) -> None:
        """Remove the staging folder (a build that failed or was interrupted)."""
        if self._kept is None and self.folder.name.startswith(".staging-"):
            shutil.rmtree(self.folder, ignore_errors=True)


def _release_id(release: Release) -> str:
    return release.sha256("manifest.json")[:16]


def _swap_current(target: Path, rid: str, on_swap):
    """Point ``current`` at releases/<rid>, with SIGINT and SIGTERM held back between the
    rename and ``on_swap`` so that the caller always learns whether it happened."""
    tmp = target / f".current-{os.getpid()}"
    if tmp.is_symlink():
        tmp.unlink()
    os.symlink(f"{RELEASES}/{rid}", tmp)
    held = {signal.SIGINT, signal.SIGTERM}
    old = signal.pthread_sigmask(signal.SIG_BLOCK, held)
    try:
        os.replace(tmp, target / CURRENT)
        if on_swap:
            on_swap()
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


def _take_over_flat(target: Path, files):
    """Remove ``files``, those of a release written flat by an earlier version (all listed in
    its own manifest, checked by kind_of), and the folders they leave empty."""
    for rel in sorted(files, reverse=True):
        (target / rel).unlink()
    for d in sorted({(target / rel).parent for rel in files}, key=lambda p: -len(p.parts)):
        while d != target and d.is_dir() and not any(d.iterdir()):
            d.rmdir()
            d = d.parent


def _prune(target: Path, keep: set):
    """Delete releases beyond the newest KEEP_RELEASES (never the ones in ``keep``)."""
    home = target / RELEASES
    olds = [p for p in home.iterdir() if _RELEASE_ID.match(p.name) and p.name not in keep
            and p.is_dir() and not p.is_symlink()]
    olds.sort(key=lambda p: p.stat().st_mtime, reverse=True)
    for p in olds[max(0, KEEP_RELEASES - len(keep)):]:
        shutil.rmtree(p, ignore_errors=True)


def _checked_and_synced(release: Release, check=None) -> None:
    """``check(release.folder)`` while another thread makes the release durable
    (``Release.sync``): the check reads the files back and hashes them while the kernel
    writes them out, both waiting outside the interpreter (at 10 000 species 0.1 s and
    0.15 s, one after the other before). Returns when both are done; raises what either
    raised, the check's first."""
    import threading

    failed = []

    def sync():
        try:
            release.sync()
        except BaseException as exc:  # noqa: BLE001 - raised in the publishing thread
            failed.append(exc)

    syncing = threading.Thread(target=sync, name="thermoledger-sync", daemon=True)
    syncing.start()
    try:
        if check:
            check(release.folder)
    finally:
        syncing.join()
    if failed:
        raise failed[0]


def publish(target: Path, release: Release, check=None, on_swap=None) -> list:
    """Make ``release`` (``Release.staged`` in ``target``, every file written) the new
    current release of the locked release home ``target`` (see ``locked``).

    ``check(staging_path)`` may raise to abort before anything is swapped in; ``on_swap()``
    is called the moment the new release is current. Returns the paths of the release's
    files as readers see them (through ``target``'s links).
    """
    target = Path(target)
    flat = release.flat
    rid = _release_id(release)
    staging = release.folder
    home = target / RELEASES
    final = home / rid
    try:
        if not final.is_dir():
            _checked_and_synced(release, check)
            home.mkdir(exist_ok=True)
            os.rename(staging, final)
        else:
            release.discard()
            if check:
                check(final)  # equal manifests: the same release is already there
        release.folder = final
    except BaseException:
        release.discard()
        raise
    if flat is not None:
        _take_over_flat(target, flat)
    previous = os.readlink(target / CURRENT) if (target / CURRENT).is_symlink() else None
    top = sorted({rel.split("/", 1)[0] for rel in release})
    for name in top:
        _link(target, name, f"{CURRENT}/{name}")
    _swap_current(target, rid, on_swap)
    for entry in target.iterdir():   # links to entries the new release no longer has
        if (entry.is_symlink() and entry.name not in top
                and os.readlink(entry) == f"{CURRENT}/{entry.name}"):
            entry.unlink()
    keep = {rid} | ({Path(previous).name} if previous else set())
    _prune(target, keep)
    return [target / rel for rel in release]
