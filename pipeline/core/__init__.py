"""What every stage shares: constants with their sources, units, chemistry, errors, limits,
settings, the findings registry, the records passed between stages, names and hashes, the
shipped schemas, strict JSON reading and atomic writes. Imports nothing else of the package."""
