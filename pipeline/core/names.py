"""Content hashes, and the names and file names derived from species ids (one home for all)."""

import hashlib
import re
from functools import lru_cache

from .errors import OutputError

#: hex digits of the id's sha256 appended to a species' file names
STEM_DIGEST_DIGITS = 10


def sha256(data: bytes) -> str:
    """The sha256 of ``data`` as 64 lower-case hex digits."""
    return hashlib.sha256(data).hexdigest()


_UNSAFE, _DOTS = re.compile(r"[^A-Za-z0-9._-]+"), re.compile(r"\.{2,}")


def safe_name(text: str) -> str:
    """A file-name and identifier-safe form of a species id: 'CO2(g)' -> 'CO2_g'."""
    name = _DOTS.sub("_", _UNSAFE.sub("_", text)).strip("._-")
    return name[:80] or "species"


def species_name(species_id: str) -> str:
    """The species name of a species id: 'Ti(cr-alpha)' -> 'Ti' (the text before the last
    parenthesis, so that 'Ca(OH)2(cr)' -> 'Ca(OH)2')."""
    return species_id.rsplit("(", 1)[0]


@lru_cache(maxsize=1 << 18)
def file_stem(species_id: str) -> str:
    """The file name (without suffix) of a species' report page, plot or table.

    The readable part is ``safe_name``; the suffix is the first 10 hex digits of the sha256 of
    the exact id, so ids that sanitise alike ('NO(g)', 'NO+(g)') or differ only in case
    ('CO(g)', 'Co(g)', on case-insensitive file systems) never share a file, and a species
    keeps its file names from release to release: 'CO2(g)' -> 'CO2_g-<10 hex>'. Kept once
    made: a release names each species' files several times (the check of their names,
    the provenance, the report).
    """
    digest = sha256(species_id.encode("utf-8"))[:STEM_DIGEST_DIGITS]
    return f"{safe_name(species_id)[:60]}-{digest}"


def file_stems(species_ids) -> dict:
    """{id: file_stem(id)}, checked to be unique case-insensitively (OutputError if not)."""
    stems = {i: file_stem(i) for i in species_ids}
    seen = {}
    for i, stem in stems.items():
        other = seen.setdefault(stem.lower(), i)
        if other != i:
            raise OutputError(f"species {other!r} and {i!r} would share the file name {stem}")
    return stems
