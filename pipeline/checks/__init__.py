"""The validation stage: the registry of table checks (``registry``) and the checks by topic
(``physical``, ``smoothness``, ``columns``, ``coverage``), the reconciliation of sources
(``reconcile``) and maintainers' acknowledgements (``acknowledge``). Checks return findings;
they never raise on bad data."""
