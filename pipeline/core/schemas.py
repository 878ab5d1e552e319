"""The JSON Schemas shipped with the package (schemas/ in the source tree, installed as
``thermoledger.schemas``), read with importlib.resources so that an installed wheel finds
them as well as a checkout does."""

import json
from functools import lru_cache
from importlib import resources

#: every schema the package ships, by file name
NAMES = ("findings.schema.json", "library.schema.json", "manifest.schema.json",
         "source.schema.json")


def schema_bytes(name: str) -> bytes:
    """The bytes of schemas/``name`` as shipped (copied verbatim into each release)."""
    if name not in NAMES:
        raise KeyError(f"no schema named {name!r}; known: {', '.join(NAMES)}")
    return resources.files("thermoledger.schemas").joinpath(name).read_bytes()


@lru_cache(maxsize=len(NAMES))
def validator(name: str):
    """A checked Draft 2020-12 validator of schemas/``name`` (the jsonschema package), built
    once per process: it explains every error."""
    from jsonschema import Draft202012Validator

    schema = json.loads(schema_bytes(name))
    Draft202012Validator.check_schema(schema)
    return Draft202012Validator(schema)


@lru_cache(maxsize=len(NAMES))
def compiled(name: str):
    """A compiled Draft 2020-12 validator of schemas/``name`` (jsonschema-rs), built once per
    process: 30-300 times faster than ``validator`` on a whole library, used to tell valid
    from invalid before ``validator`` explains what is wrong."""
    import jsonschema_rs

    return jsonschema_rs.Draft202012Validator(json.loads(schema_bytes(name)),
                                              validate_formats=False)


@lru_cache(maxsize=len(NAMES))
def _part_schema(name: str, key: str) -> dict:
    """schemas/``name`` requiring only its property ``key``: a document of that property
    alone is checked as the whole document's would be."""
    return {**json.loads(schema_bytes(name)), "required": [key]}


@lru_cache(maxsize=len(NAMES))
def _compiled_part(name: str, key: str):
    import jsonschema_rs

    return jsonschema_rs.Draft202012Validator(_part_schema(name, key), validate_formats=False)


def part_errors(name: str, key: str, items: list, offset: int = 0) -> list:
    """(path, message) of every way the items ``items`` of the top-level list ``key`` of a
    document of schemas/``name`` break it, those items being the list's items ``offset``
    onwards: the paths count in the whole list. A long list is so checked a part at a time,
    never whole (the compiled validator first, jsonschema to explain, as ``errors_of``)."""
    doc = {key: items}
    if _compiled_part(name, key).is_valid(doc):
        return []
    from jsonschema import Draft202012Validator

    out = []
    for e in sorted(Draft202012Validator(_part_schema(name, key)).iter_errors(doc),
                    key=lambda e: list(map(str, e.path))):
        path = list(e.absolute_path)
        if len(path) > 1 and path[0] == key:
            path[1] += offset
        out.append(("/".join(map(str, path)), e.message))
    return out


def where(error) -> str:
    """The path of the field a schema error is about, 'tables/0/file', or '(top level)'."""
    return "/".join(map(str, error.absolute_path)) or "(top level)"


def errors_of(doc, name: str) -> list:
    """Every way ``doc`` breaks schemas/``name``, sorted by the path of the offending field:
    the compiled validator passes a valid document at once; the errors of an invalid one come
    from the jsonschema package, whose messages name the field."""
    if compiled(name).is_valid(doc):
        return []
    return sorted(validator(name).iter_errors(doc), key=lambda e: list(map(str, e.path)))
