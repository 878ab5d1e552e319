"""Report pages taken from the release a build replaces instead of drawn again.

The species pages of a report are held in page files of about GROUP species each
(``page_of``: the file of a species is chosen by a hash of its id; each species is a
section of its file, shown alone when the address names it, ``file.html#<its stem>``):
creating a file cost 0.1-0.9 ms of system time on the benchmark machine, more than drawing
a species, and a report of 100 000 species in 100 000 files is unwieldy to copy or serve.
A page file is made from what ``report._species_files`` is given for its species alone —
their library entries, plot points and formation rows — and from what is the same for
every file: the acceptance threshold, the library's transitions and the code. A build that
draws a report keeps, beside its partitions, per page file the sha256 of those inputs and
its path, sha256 and size: one JSON line per file, in the order of their paths, in
``pages-<release>.jsonl`` of the store, named for the release it published. The next build
into the same release home, when that release is still the current one, hard-links (no
copy: releases are never changed in place) every page file whose inputs have the same
sha256 from it, and draws the others: after one table of 10 000 is edited, one file of
some GROUP species is drawn instead of all. A linked file is read once to check its sha256
against the one kept (a file changed since is drawn again), and the staged release is
checked against its manifest as always, so the release is the one a fresh build makes.
Both lists are read and written a line at a time, in the same order: nothing is held per
file.
"""

import hashlib
import os
import pickle
import re
from collections import deque
from pathlib import Path

from ..core.names import file_stem
from .publish import STORE

#: the kept pages of release <id> in the store of partitions (publish.STORE)
KEPT = "pages-{}.jsonl"
_KEPT = re.compile(r"^pages-[0-9a-f]{16}\.jsonl$")
_PENDING = re.compile(r"^\.pending-\d+-pages\.jsonl$")

#: species pages in one page file, at most on average: a report of n species has the
#: smallest power of two of files that is at least n / GROUP
GROUP = 16


def page_files(species: int) -> int:
    """How many page files hold the pages of a report of ``species`` species."""
    files = 1
    while files * GROUP < species:
        files *= 2
    return files


def page_of(species_id: str, files: int) -> tuple:
    """(path of the page file of ``species_id`` among ``files`` page files, the id of its
    section there): the file chosen by a hash of the id, the same on every machine and in
    every report of as many files."""
    k = int.from_bytes(hashlib.sha256(species_id.encode("utf-8")).digest()[:8], "big") % files
    return f"report/species/{files}-{k:0{len(str(files - 1))}d}.html", file_stem(species_id)


class Drawn:
    """The page files of the last release of ``home`` that a build may link (``take``), and
    those of the build (``wait`` as sent to be drawn, ``drew`` when drawn), kept for the
    next one in the order of their paths when its release is published (``save``;
    ``discard`` when it is not). ``shared`` is what all pages depend on besides
    their own inputs (the code's digest); with ``use`` False (--fresh) nothing is taken."""

    def __init__(self, home, shared: str, use: bool = True):
        from ..library.document import release_folder

        self.home, self.shared = Path(home), shared
        self.store = self.home / STORE
        self.folder, self.release, self.linked = None, None, 0
        self._lines, self._ahead, self._out = None, None, None
        self._queue, self._waiting = deque(), {}
        if not use:
            return
        try:
            folder = release_folder(self.home)
            self._lines = open(self.store / KEPT.format(folder.name), "rb")
            self.folder = folder
        except OSError:
            pass

    def into(self, release) -> "Drawn":
        """These pages, linked into and remembered from ``release`` (publish.Release)."""
        self.release = release
        return self

    def base(self, accept, transitions):
        """The digest of what every page of this report depends on."""
        h = hashlib.sha256(self.shared.encode())
        h.update(pickle.dumps((accept, transitions), protocol=5))
        return h

    def key(self, base, species, points, formed) -> str:
        """The sha256 of the inputs of a page file: its ``species`` (the keys of their
        library entries: library.entries.key_of), their plot ``points`` (pickled) and
        formation rows ``formed``."""
        h = base.copy()
        h.update(pickle.dumps((species, points, formed), protocol=5))
        return h.hexdigest()

    def _kept(self, name: str):
        """The kept line of page file ``name`` (its path, key, [[path, sha256, size]]), or
        None: the kept lines are read forward, in the order of the paths."""
        import orjson

        while self._lines is not None:
            if self._ahead is None:
                line = self._lines.readline()
                try:
                    self._ahead = orjson.loads(line) if line else None
                except ValueError:
                    self._ahead = None
                if not isinstance(self._ahead, list) or len(self._ahead) != 3 or \
                        not isinstance(self._ahead[0], str):
                    self._lines.close()
                    self._lines = self._ahead = None
                    return None
            if self._ahead[0] > name:
                return None
            ahead, self._ahead = self._ahead, None
            if ahead[0] == name:
                return ahead
        return None

    def take(self, name: str, key: str, species: int) -> bool:
        """Link page file ``name`` (of ``species`` species) from the last release into the
        release (``into``) when it was drawn from inputs of sha256 ``key`` and is as it was;
        False otherwise."""
        kept = self._kept(name)
        if kept is None or kept[1] != key:
            return False
        try:
            files = [(str(rel), str(sha), int(size)) for rel, sha, size in kept[2]]
            if [rel for rel, _, _ in files] != [name]:
                return False
            for rel, sha, size in files:
                if not self.release.link(rel, self.folder / rel, sha, size):
                    return False
        except (TypeError, ValueError):
            return False
        self._queue.append([name, key, files])
        self._flush()
        self.linked += species
        return True

    def wait(self, name: str, key: str) -> None:
        """Page file ``name``, not taken, is being drawn from inputs of sha256 ``key`` (its
        line is kept in its place, after those before it)."""
        self._waiting[name] = [name, key, None]
        self._queue.append(self._waiting[name])

    def drew(self, name: str) -> None:
        """Remember page file ``name`` (``wait``) just drawn into the release."""
        self._waiting.pop(name)[2] = [(name, *self.release.summary(name))]
        self._flush()

    def _flush(self) -> None:
        """Write the lines whose pages are all there, in the order the species came."""
        import orjson

        while self._queue and self._queue[0][2] is not None:
            line = self._queue.popleft()
            if self._out is None:
                if not self.store.is_dir():
                    continue
                self._out = open(self._pending(), "wb")
            self._out.write(orjson.dumps(line) + b"\n")

    def _pending(self) -> Path:
        return self.store / f".pending-{os.getpid()}-pages.jsonl"

    def _close(self) -> None:
        for fh in (self._lines, self._out):
            if fh is not None:
                fh.close()
        self._lines = None

    def save(self) -> None:
        """Keep this build's pages for the next one under the name of the release just
        published, and remove the kept pages of other releases and of killed builds."""
        from ..library.document import release_folder

        self._close()
        if self._out is None:
            return
        self._out = None
        name = KEPT.format(release_folder(self.home).name)
        os.replace(self._pending(), self.store / name)
        for path in self.store.iterdir():
            if (_KEPT.match(path.name) and path.name != name) or _PENDING.match(path.name):
                path.unlink(missing_ok=True)

    def discard(self) -> None:
        """Remove what this build wrote (its release was not published)."""
        self._close()
        if self._out is not None:
            self._out = None
            self._pending().unlink(missing_ok=True)
