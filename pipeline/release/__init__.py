"""The release stage: the library document and its Parquet form (``document``), evaluated
tables (``tables``), provenance, the report and its plots, assembly of every file
(``assemble``), atomic publishing (``publish``) and the audit comparison (``audit``)."""
