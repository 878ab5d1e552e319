"""Acknowledgements: warnings a maintainer has reviewed, declared in source.json.

A table entry may carry ``"acknowledge": [{"code": "...", "line": 12, "reason": "..."}]``.
A matching warning keeps its place in the findings and the provenance, with the
reason attached, but no longer counts towards the totals or ``--strict``. Errors
cannot be acknowledged; an acknowledgement that matches nothing is reported.
"""

from dataclasses import replace

from ..core.findings import ERROR, finding, subject


def apply(tables, findings):
    """Return findings with acknowledgements applied, plus ACK-* findings."""
    out = list(findings)
    extra = []
    index = {}
    for i, f in enumerate(out):
        index.setdefault(subject(f), []).append(i)
    for table in tables:
        meta = table.meta
        for k, ack in enumerate(meta.acknowledgements):
            field = f"tables/{meta.index}/acknowledge/{k}"
            where = dict(source=meta.source.id, file=f"{meta.source.folder}/source.json",
                         column=field)
            matched = False
            for i in index.get(meta.file, ()):
                f = out[i]
                if f.code != ack["code"]:
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
