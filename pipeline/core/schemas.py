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


@lru_cache(maxsize=len(NAMES))
def _validator_part(name: str, key: str):
    from jsonschema import Draft202012Validator

    return Draft202012Validator(_part_schema(name, key))


def part_errors(name: str, key: str, items: list, offset: int = 0) -> list:
    """(path, message) of every way the items ``items`` of the top-level list ``key`` of a
    document of schemas/``name`` break it, those items being the list's items ``offset``
    onwards: the paths count in the whole list. A long list is so checked a part at a time,
    never whole (as ``errors_of``: the compiled validator first, jsonschema to explain)."""
    out = []
    for e in _explained(_compiled_part(name, key), lambda: _validator_part(name, key),
                        {key: items}):
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
    return _explained(compiled(name), lambda: validator(name), doc)


def _explained(fast, slow, doc) -> list:
    """[] when the compiled validator ``fast`` passes ``doc``, else the errors of the
    jsonschema validator ``slow()`` (made only then: reading a valid document loads no
    jsonschema), sorted by the path of the offending field."""
    if fast.is_valid(doc):
        return []
    return sorted(slow().iter_errors(doc), key=lambda e: list(map(str, e.path)))
