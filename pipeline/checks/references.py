"""The reference states of the elements a build declares (core/elements.py): the build
settings first, then the sources' "reference_states" by priority, then the defaults
(applied when the library is written, release/formation.py).

Sources of equal priority naming different species for one element are reported
(FORM-REF-UNCLEAR) and the first by source id is kept, so the choice never depends on the
order folders are read; so is a key that is not an element.
"""

from ..core.atomic_weights import STANDARD_ATOMIC_WEIGHTS
from ..core.findings import finding


def declare(sources, settings_references=()) -> tuple:
    """(((element, species name or id, origin), ...) sorted, findings) from the sources'
    declarations and the settings' (which win)."""
    chosen, problems = {}, []
    order = sorted(sources, key=lambda s: (-s.priority, s.id))
    for src in order:
        where = dict(source=src.id, file=f"{src.folder}/source.json")
        for el, name in src.references:
            column = f"reference_states/{el}"
            if el not in STANDARD_ATOMIC_WEIGHTS:
                problems.append(finding("FORM-REF-UNCLEAR", f"'{el}' is not an element symbol; "
                                        "its reference state is ignored", column=column,
                                        seen=el, expected="a symbol such as C, Ti, O", **where))
                continue
            if el not in chosen:
                chosen[el] = (name, f"source {src.id}", src.priority)
                continue
            kept, origin, prio = chosen[el]
            if kept != name and prio == src.priority:
                problems.append(finding(
                    "FORM-REF-UNCLEAR", f"the reference state of {el} is {name} here but "
                    f"{kept} in {origin.split(' ', 1)[1]} of the same priority; {kept} is kept",
                    column=column, seen=name, expected=kept, **where))
    out = {el: (name, origin) for el, (name, origin, _) in chosen.items()}
    for el, name in settings_references:
        out[el] = (name, "settings")
    return tuple(sorted((el, name, origin) for el, (name, origin) in out.items())), problems
