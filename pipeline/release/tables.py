"""Evaluated tables written into a release: one Parquet table for all species and, on
request, one CSV per species (rows from ``library.tables``). CSV text cells that a
spreadsheet would execute (leading =, +, -, @, tab or carriage return) are neutralised with a
leading apostrophe (the usual defence against formula injection, common practice).
"""

import csv
import io
import math

import numpy as np
import pyarrow as pa

from ..core.names import file_stem
from ..library import tables as evaluated
from ..library.entries import ids_of
from ..library.formation import Formation
from ..library.tables import COLUMNS, FLAGS, HEADERS, TEXT, UNITS, species_rows, stable_rows
from .arrowmem import arrow_array, parquet_chunks, regrouped

DANGEROUS = ("=", "+", "-", "@", "\t", "\r")


#: rows per row group of tables.parquet (as library.parquet's), each made and written in
#: turn: a group of pyarrow's default 1 Mi rows held some 250 MB of columns at once
ROW_GROUP = 64 * 1024


#: the columns of tables.parquet written dictionary-encoded (Parquet's default is every
#: column): the species' ids and phases, repeated on each of their rows. Of the numbers,
#: nearly all distinct, a dictionary was tried and given up page by page: at 10 000 species
#: the file took 122 instead of 55 ms to write and was 22.2 instead of 17.7 MB
DICTIONARY_COLUMNS = ("id", "phase")


def tables_parquet_chunks(doc, step=100.0, points=None, own=None, taken=None):
    """tables.parquet in byte pieces as it is written (arrowmem.parquet_chunks): the
    evaluated table of every species (T [K], Cp [J/(mol K)], ...), units in the key-value
    metadata. ``own`` maps species ids to their ``own_rows`` made where they were fitted
    (with this ``step``); only the formation properties are added here. Written a row group
    at a time (ROW_GROUP rows): at 100 000 species the table has some 3 million rows and
    220 MB, never held whole. ``taken`` (release.reuse.Taking) gives the rows of the species
    it can take from the last release's tables.parquet and hears where every species' rows
    lie."""
    trs = evaluated.transitions_of(doc.get("transitions", []))
    made = Formation(doc)
    own = own or {}
    schema = table_schema(doc)
    if taken is not None:
        taken.schema = schema

    def tables():
        pending, count = [], 0
        species = doc["species"]
        for i, sid in enumerate(ids_of(species)):      # an entry is read only when needed
            place = taken.rows(i) if taken else None
            if place is not None:
                if pending:
                    yield _table(_columns(pending), schema, count)
                    pending, count = [], 0
                yield from taken.take(i, place)
                continue
            if taken:
                yield from taken.flush()
            part = evaluated.with_formation(own[sid], sid, made) if sid in own else \
                species_rows(species[i], step, points, trs.get(sid, ()), made)
            pending.append(part)
            count += len(part["T"])
            if taken:
                taken.made(i, len(part["T"]))
            while count >= ROW_GROUP:          # a whole group, the rest kept as columns
                group = _columns(pending)
                yield _table(group, schema, ROW_GROUP)
                pending = [{c: v[ROW_GROUP:] for c, v in group.items()}]
                count -= ROW_GROUP
        if taken:
            yield from taken.flush()
        if pending:
            yield _table(_columns(pending), schema, count)

    return parquet_chunks(schema, regrouped(tables(), ROW_GROUP, schema), compression="zstd",
                          use_dictionary=list(DICTIONARY_COLUMNS))


def table_schema(doc):
    """The Arrow schema of tables.parquet of library document ``doc``."""
    return pa.schema([(c, pa.string() if c in TEXT else (
        pa.bool_() if c in FLAGS else pa.float64())) for c in COLUMNS],
        metadata={"thermoledger.units": str(UNITS), "thermoledger.notice": doc["notice"]})


def tables_parquet_bytes(doc, step=100.0, points=None, own=None) -> bytes:
    """tables.parquet whole (``tables_parquet_chunks`` joined)."""
    return b"".join(tables_parquet_chunks(doc, step, points, own))


def _columns(parts) -> dict:
    """The rows of ``parts`` (dicts of columns) as one dict of columns: numbers in arrays,
    text in lists."""
    cols = {c: (np.concatenate([np.asarray(p[c]) for p in parts]) if parts else np.array([]))
            for c in COLUMNS if c not in TEXT}
    cols.update({c: [x for p in parts for x in p[c]] for c in TEXT})
    return cols


def _table(cols: dict, schema, rows: int):
    """The first ``rows`` rows of ``cols`` as an Arrow table of ``schema``."""
    return pa.table({c: arrow_array(cols[c][:rows], schema.field(c).type)
                     for c in COLUMNS}, schema=schema)


def neutralise(cell: str) -> str:
    """A text cell safe to open in a spreadsheet."""
    return "'" + cell if cell.startswith(DANGEROUS) else cell


def csv_bytes(sp, step=100.0, points=None, transitions=(), formation=None) -> bytes:
    """The evaluated table of one species as CSV bytes, text cells neutralised."""
    return _csv(f"{sp['id']} ({sp['form']})", species_rows(sp, step, points, transitions,
                                                          formation))


def _csv(title, rows) -> bytes:
    out = io.StringIO(newline="")
    w = csv.writer(out, lineterminator="\n")
    w.writerow([neutralise(f"# {title} from thermoledger; review by a qualified person before "
                           "engineering use")])
    w.writerow([neutralise(f"{HEADERS.get(c, c)} [{UNITS[c]}]" if c in UNITS else c)
                for c in ("species",) + COLUMNS[1:]])
    for i in range(len(rows["T"])):
        w.writerow([neutralise(str(rows[c][i])) if c in TEXT else
                    ("yes" if rows[c][i] else "no") if c in FLAGS else _number(rows[c][i])
                    for c in COLUMNS])
    return out.getvalue().encode("utf-8")


def _number(x) -> str:
    """A number cell: the shortest round-trip repr, empty for NaN (no value)."""
    x = float(x)
    return "" if math.isnan(x) else repr(x)


def csv_files(doc, step=100.0, points=None) -> dict:
    """{tables/<file stem>.csv: bytes} for every species of ``doc``, and for every species
    with transitions the table across its phases (tables/<name>.csv, stable rows only)."""
    trs = doc.get("transitions", [])
    made = Formation(doc)
    trs_of = evaluated.transitions_of(trs)
    files = {f"tables/{file_stem(sp['id'])}.csv": csv_bytes(sp, step, points,
                                                             trs_of.get(sp["id"], ()), made)
             for sp in doc["species"]}
    for name in sorted({x["species"] for x in trs}):
        files[f"tables/{file_stem(name)}.csv"] = _csv(f"{name}, stable phase at each "
                                                      "temperature", stable_rows(doc, name, step))
    return files
