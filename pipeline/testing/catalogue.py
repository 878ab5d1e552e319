"""The synthetic catalogue of the benchmarks (benchmarks/bench_build.py and its siblings) and
of the tests of the batched path: computed ideal-gas species as a statistical-mechanics or
quantum-chemistry group would hand them over.

Every species is SYNTHETIC: Cp of a rigid rotor and harmonic oscillators (physics/statmech)
of random wavenumbers (300-3500 cm⁻¹, seeded), with 0.1 % seeded noise, at the same
temperatures (``points`` - 1 geometric steps over 200-3000 K, and 298.15 K). Its anchors
(−100 kJ/mol, 250 J/(mol K)) and formula are placeholders. For benchmarks and tests only:
none of it is a check value.
"""

import json
from pathlib import Path

import numpy as np

from ..core.constants import GAS_CONSTANT
from ..physics import statmech

#: species per source beyond four sources (a source.json of 2 000 tables is about 0.5 MB)
SOURCE_TABLES = 2000


def random_molecule(rng, max_atoms: int = 8) -> tuple:
    """(geometry, atoms, wavenumbers [1/cm]) of a SYNTHETIC rigid-rotor/harmonic-oscillator
    molecule drawn from ``rng``: 2 to ``max_atoms`` atoms, linear when two and for 30 % of
    the others, its 3N − 5 or 3N − 6 wavenumbers uniform in 300-3500 cm⁻¹."""
    atoms = int(rng.integers(2, max_atoms + 1))
    geometry = "linear" if atoms == 2 or rng.random() < 0.3 else "nonlinear"
    return geometry, atoms, rng.uniform(300.0, 3500.0, 3 * atoms - (5 if geometry == "linear"
                                                                  else 6))


def write_catalogue(raw: Path, n: int, points: int = 100, seed: int = 1,
                    flagged: bool = False) -> None:
    """Write n species into four sources, or one per SOURCE_TABLES species when there are
    more (a source.json stays under the size ingest accepts); with flagged, every table has
    one outlier (+3 %) that its source.json acknowledges, so every table carries a
    finding."""
    n_sources = max(4, -(-n // SOURCE_TABLES))
    rng = np.random.default_rng(seed)
    t = np.unique(np.append(np.geomspace(200.0, 3000.0, points - 1), 298.15))
    per_source = {}
    for i in range(n):
        geometry, atoms, nu = random_molecule(rng)
        cp = GAS_CONSTANT * statmech.rrho_cp_over_r(t, geometry, nu)
        cp *= 1 + 1e-3 * rng.standard_normal(t.size)
        if flagged:
            cp[t.size // 2] *= 1.03
        formula = f"C{atoms - 1}O" if atoms > 2 else "CO"
        source = f"bench-{i % n_sources}"
        folder = raw / source
        folder.mkdir(parents=True, exist_ok=True)
        name = f"s{i:06d}"
        lines = ["T [K],Cp [J/(mol*K)]"] + [f"{a:.6g},{b:.6f}" for a, b in zip(t, cp)]
        (folder / f"{name}.csv").write_text("\n".join(lines) + "\n")
        per_source.setdefault(source, []).append(
            {"file": f"{name}.csv", "species": name, "formula": formula, "phase": "g",
             "geometry": geometry, "enthalpy_of_formation_298": "-100 kJ/mol",
             "entropy_298": "250 J/(mol*K)"})
        if flagged:
            per_source[source][-1]["acknowledge"] = [
                {"code": "SMOOTH-OUTLIER", "reason": "planted by the benchmark"}]
    for k, (source, tables) in enumerate(sorted(per_source.items())):
        doc = {"source": source, "title": "benchmark", "citation": "synthetic",
               "method": "estimation", "standard_pressure": "1 bar", "priority": k,
               "license": "CC0-1.0", "notes": "SYNTHETIC benchmark data", "tables": tables}
        (raw / source / "source.json").write_text(json.dumps(doc))
