"""thermoledger: curate heat-capacity tables into an anchored, auditable coefficient library.

For users of a curated library::

    import thermoledger
    lib = thermoledger.load_library("curated")
    lib["N2(g)"].cp([300.0, 1000.0])      # J/(mol K)

The package's stages are sub-packages that follow the data flow: ``core`` → ``physics`` →
``ingest`` → ``checks`` → ``fit`` → ``library`` → ``release``, wired by ``build`` and the
``cli``. Importing ``thermoledger`` itself loads nothing else: the names below load on first
use.
"""

__version__ = "0.4.14"

_API = ("load_library", "Library", "Species", "SpeciesNotFound")
__all__ = ["__version__", *_API]


def __getattr__(name):
    if name in _API:
        from .library import api

        return getattr(api, name)
    raise AttributeError(f"module 'thermoledger' has no attribute {name!r}")


def __dir__():
    return sorted(list(globals()) + list(_API))
