"""What a user of a curated library imports: ``load_library`` and the ``Library`` and
``Species`` it returns (``api``), the plain-document readers (``document``), evaluated
tables (``tables``) and the comparison of two libraries (``diff``). Depends only on
``core`` and ``physics``."""

from ..core.errors import SpeciesNotFound
from .api import Library, Species, load_library

__all__ = ["Library", "Species", "SpeciesNotFound", "load_library"]
