"""Report pages taken from the release a build replaces instead of drawn again.

The page of one species (its HTML page, which holds its Cp plot and its H and S deviation
plot) is made from what ``report._species_files`` is given for it alone — its library entry,
its plot points, its formation rows — and from what is the same for every species: the
acceptance threshold, the library's transitions and the code. A build that draws a report
keeps, beside its partitions, per species the sha256 of those inputs and the path, sha256
and size of each of its pages: one JSON line per species, in the report's order (by species id), in
``pages-<release>.jsonl`` of the store, named for the release it published. The next build
into the same release home, when that release is still the current one, hard-links (no
copy: releases are never changed in place) the pages of every species whose inputs have the
same sha256 from it, and draws the others: after one table of 10 000 is edited, a handful of
species are drawn instead of 10 000. A linked page is read once to check its sha256 against
the one kept (a page changed since is drawn again), and the staged release is checked
against its manifest as always, so the release is the one a fresh build makes. Both lists
are read and written a line at a time, in the same order: nothing is held per species.
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


def page_paths(species_id: str) -> tuple:
    """The paths of the report files of a species: its page, which holds its plots (one
    file to create instead of three: creating a file cost 0.2-0.9 ms of system time on the
    benchmark machine, more than drawing the species)."""
    return (f"report/species/{file_stem(species_id)}.html",)


class Drawn:
    """The report pages of the last release of ``home`` that a build may link (``take``),
    and those of the build (``wait`` as sent to be drawn, ``drew`` when drawn), kept for the
    next one in the order the species came when its release is published (``save``;
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

    def key(self, base, sp, points, formed) -> str:
        """The sha256 of the inputs of the pages of entry ``sp``."""
        h = base.copy()
        h.update(pickle.dumps((sp, points, formed), protocol=5))
        return h.hexdigest()

    def _kept(self, species_id: str):
        """The kept line of ``species_id`` (species id, key, [[path, sha256, size]...]), or
        None: the kept lines are read forward, in the order the species come."""
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
            if self._ahead[0] > species_id:
                return None
            ahead, self._ahead = self._ahead, None
            if ahead[0] == species_id:
                return ahead
        return None

    def take(self, species_id: str, key: str) -> bool:
        """Link the pages of ``species_id`` from the last release into the release (``into``)
        when they were drawn from inputs of sha256 ``key`` and are as they were; False
        otherwise (a page linked before one found changed is written over when drawn)."""
        kept = self._kept(species_id)
        if kept is None or kept[1] != key:
            return False
        try:
            files = [(str(rel), str(sha), int(size)) for rel, sha, size in kept[2]]
            if not files or any(rel not in page_paths(species_id) for rel, _, _ in files):
                return False
            for rel, sha, size in files:
                if not self.release.link(rel, self.folder / rel, sha, size):
                    return False
        except (TypeError, ValueError):
            return False
        self._queue.append([species_id, key, files])
        self._flush()
        self.linked += 1
        return True

    def wait(self, species_id: str, key: str) -> None:
        """``species_id``, whose pages are not taken, is being drawn from inputs of sha256
        ``key`` (its line is kept in its place, after those before it)."""
        self._waiting[species_id] = [species_id, key, None]
        self._queue.append(self._waiting[species_id])

    def drew(self, species_id: str) -> None:
        """Remember the pages of ``species_id`` (``wait``) just drawn into the release."""
        self._waiting.pop(species_id)[2] = [(rel, *self.release.summary(rel)) for rel in
                                            page_paths(species_id) if rel in self.release]
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
