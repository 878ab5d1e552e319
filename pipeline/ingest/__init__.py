"""The ingest stage: discover sources under raw/, read source.json (``sources``) and each
CSV table (``csvtable``) into SI tables with their provenance."""

from .sources import IngestResult, ingest, inputs_digest

__all__ = ["IngestResult", "ingest", "inputs_digest"]
