"""Acknowledgements: warnings a maintainer has reviewed, declared in source.json.

A table entry may carry ``"acknowledge": [{"code": "...", "line": 12, "reason": "..."}]``.
A matching warning keeps its place in the findings and the provenance, with the
reason attached, but no longer counts towards the totals or ``--strict``. Errors
cannot be acknowledged; an acknowledgement that matches nothing is reported.
"""

from dataclasses import replace

from .findings import ERROR, finding


def apply(tables, findings):
    """Return findings with acknowledgements applied, plus ACK-* findings."""
    out = list(findings)
    extra = []
    for table in tables:
        meta = table.meta
        for k, ack in enumerate(meta.acknowledgements):
            field = f"tables/{meta.index}/acknowledge/{k}"
            where = dict(source=meta.source.source, file=f"{meta.source.folder}/source.json",
                         column=field)
            matched = False
            for i, f in enumerate(out):
                concerns = f.file == meta.file or f.extra.get("table") == meta.file
                if not concerns or f.code != ack["code"]:
                    continue
                if ack.get("line") is not None and f.line != ack["line"]:
                    continue
                matched = True
                if f.severity == ERROR:
                    extra.append(finding("ACK-NOT-ALLOWED", f"{f.code} at {meta.file} is an error "
                                         "and cannot be acknowledged", seen=f.code, **where))
                else:
                    out[i] = replace(f, acknowledged=ack["reason"])
            if not matched:
                line = f" line {ack['line']}" if ack.get("line") is not None else ""
                extra.append(finding("ACK-UNUSED", f"no {ack['code']} finding{line} in "
                                     f"{meta.file} to acknowledge", seen=ack["code"], **where))
    return out + extra
