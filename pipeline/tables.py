"""Evaluated tables: Cp, H − H298, S, −(G − H298)/T and H at standard temperatures.

For every species, at 298.15 K and then every ``step`` kelvin (or a given grid) over its
range of use, with the standard uncertainties of the fit and a flag for rows outside the
data (extrapolated). Written as one Parquet table for all species and, on request, one CSV
per species. CSV text cells that a spreadsheet would execute (leading =, +, -, @, tab or
carriage return) are neutralised with a leading apostrophe (the usual defence against
formula injection, common practice).
"""

import csv
import io

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from . import forms, library
from .constants import REFERENCE_TEMPERATURE
from .provenance import file_stem

COLUMNS = ("id", "T", "Cp", "u_Cp", "H_minus_H298", "u_H", "S", "u_S", "gef", "H",
           "extrapolated")
HEADERS = {"gef": "gef = -(G-H298)/T"}  # the Gibbs energy function
UNITS = {"T": "K", "Cp": "J/(mol*K)", "u_Cp": "J/(mol*K)", "H_minus_H298": "J/mol",
         "u_H": "J/mol", "S": "J/(mol*K)", "u_S": "J/(mol*K)", "gef": "J/(mol*K)", "H": "J/mol"}
DANGEROUS = ("=", "+", "-", "@", "\t", "\r")


def grid(t_min, t_max, step=100.0, points=None):
    """298.15 K (when in range), then every ``step`` K inside [t_min, t_max], ends included."""
    if points is not None:
        t = np.asarray(sorted(points), dtype=float)
        return t[(t >= t_min) & (t <= t_max)]
    t = np.arange(np.ceil(t_min / step) * step, t_max + step, step)
    t = np.concatenate([[t_min], t[(t > t_min) & (t < t_max)], [t_max]])
    if t_min <= REFERENCE_TEMPERATURE <= t_max:
        t = np.append(t, REFERENCE_TEMPERATURE)
    return np.unique(t)


def species_rows(sp, step=100.0, points=None) -> dict:
    """Columns of the evaluated table of one library species entry."""
    t = grid(sp["ranges"][0]["t_min"], sp["ranges"][-1]["t_max"], step, points)
    ev = library.evaluate(sp, t)
    h298 = forms.evaluate(library.ranges_of(sp), [REFERENCE_TEMPERATURE], sp["form"])["H"][0]
    return {"id": [sp["id"]] * len(t), "T": t, "Cp": ev["Cp"], "u_Cp": ev["u_Cp"],
            "H_minus_H298": ev["H"] - h298, "u_H": ev["u_H"], "S": ev["S"], "u_S": ev["u_S"],
            "gef": -(ev["G"] - h298) / t, "H": ev["H"],
            "extrapolated": ev["extrapolated"].astype(bool)}


def parquet_bytes(doc, step=100.0, points=None) -> bytes:
    parts = [species_rows(sp, step, points) for sp in doc["species"]]
    cols = {c: (np.concatenate([p[c] for p in parts]) if parts else np.array([]))
            for c in COLUMNS}
    cols["id"] = [x for p in parts for x in p["id"]]
    table = pa.table({c: pa.array(cols[c], type=pa.string() if c == "id" else (
        pa.bool_() if c == "extrapolated" else pa.float64())) for c in COLUMNS})
    table = table.replace_schema_metadata({"thermoledger.units": str(UNITS),
                                           "thermoledger.notice": doc["notice"]})
    buf = io.BytesIO()
    pq.write_table(table, buf, compression="zstd")
    return buf.getvalue()


def neutralise(cell: str) -> str:
    """A text cell safe to open in a spreadsheet."""
    return "'" + cell if cell.startswith(DANGEROUS) else cell


def csv_bytes(sp, step=100.0, points=None) -> bytes:
    rows = species_rows(sp, step, points)
    out = io.StringIO(newline="")
    w = csv.writer(out, lineterminator="\n")
    w.writerow([neutralise(f"# {sp['id']} ({sp['form']}) from thermoledger; review by a "
                           "qualified person before engineering use")])
    w.writerow([neutralise(f"{HEADERS.get(c, c)} [{UNITS[c]}]" if c in UNITS else c)
                for c in ("species",) + COLUMNS[1:]])
    for i in range(len(rows["T"])):
        w.writerow([neutralise(sp["id"])] + [repr(float(rows[c][i])) for c in COLUMNS[1:-1]]
                   + ["yes" if rows["extrapolated"][i] else "no"])
    return out.getvalue().encode("utf-8")


def csv_files(doc, step=100.0, points=None) -> dict:
    return {f"tables/{file_stem(sp['id'])}.csv": csv_bytes(sp, step, points)
            for sp in doc["species"]}
