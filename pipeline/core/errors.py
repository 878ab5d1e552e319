"""One exception root for the pipeline.

Subclasses also inherit the builtin a caller would catch (ValueError for bad
input, RuntimeError for a failed computation). They carry structured fields and
build their message from them, so the message always names where and what.
"""


class ThermoledgerError(Exception):
    """Root of every error raised on purpose by thermoledger."""


def _rebuild(cls, what, fields, code):
    err = cls(what, **fields)
    if code:
        err.code = code
    return err


class InputError(ThermoledgerError, ValueError):
    """Bad input: a file, a row, a column or a field that is not what was expected."""

    #: the findings code a caller should report, when the raiser knows it better
    code = ""

    def __init__(self, what: str, *, file: str = "", line: int | None = None,
                 column: str = "", expected: str = ""):
        self.what = what
        self.file = file
        self.line = line
        self.column = column
        self.expected = expected
        super().__init__(str(self))

    def __reduce__(self):  # picklable with its fields (errors cross process boundaries)
        fields = dict(file=self.file, line=self.line, column=self.column,
                      expected=self.expected)
        return _rebuild, (type(self), self.what, fields, self.code)

    def __str__(self) -> str:
        where = ", ".join(p for p in (
            self.file,
            f"line {self.line}" if self.line is not None else "",
            f"column '{self.column}'" if self.column else "",
        ) if p)
        text = f"{where}: {self.what}" if where else self.what
        if self.expected:
            text += f" (expected {self.expected})"
        return text


class UnitError(InputError):
    """A unit or quantity string that cannot be read or has the wrong dimension."""


class FitError(ThermoledgerError, RuntimeError):
    """A fit that cannot be carried out for a species."""

    def __init__(self, species: str, reason: str):
        self.species = species
        self.reason = reason
        super().__init__(str(self))

    def __reduce__(self):
        return type(self), (self.species, self.reason)

    def __str__(self) -> str:
        return f"fit of {self.species} failed: {self.reason}"


class FitRejected(FitError):
    """A fit that was carried out but fails the acceptance thresholds."""


class OutputError(ThermoledgerError, OSError):
    """An output that could not be written or failed its schema check."""


class SpeciesNotFound(ThermoledgerError, KeyError):
    """A species name that is not in the library, or that names several phases."""

    def __init__(self, name: str, candidates=(), ambiguous: bool = False):
        self.name = name
        self.candidates = tuple(candidates)
        self.ambiguous = ambiguous
        super().__init__(name)

    def __reduce__(self):
        return type(self), (self.name, self.candidates, self.ambiguous)

    def __str__(self) -> str:
        if self.ambiguous:
            return (f"species '{self.name}' names several phases; give one of: "
                    + ", ".join(self.candidates))
        hint = f"; did you mean {', '.join(self.candidates)}?" if self.candidates else ""
        return f"species '{self.name}' is not in the library{hint}"


def let_through(exc: BaseException) -> None:
    """Raise again an interrupt or exit (a BaseException that is no Exception) behind
    ``exc``, when there is one; every net for Exception calls it first. Python 3.11 wraps
    what a class body's __set_name__ raises in a RuntimeError, so that a Ctrl-C arriving
    while a module is imported reaches such a net wrapped: it must stop the command, not
    become a table's finding."""
    for behind in chain_of(exc)[1:]:
        if not isinstance(behind, Exception):
            raise behind


def chain_of(exc: BaseException) -> list:
    """``exc`` and what caused it, each once: its __cause__, else its __context__, in turn."""
    out, seen = [], set()
    while exc is not None and id(exc) not in seen:
        out.append(exc)
        seen.add(id(exc))
        exc = exc.__cause__ or exc.__context__
    return out
