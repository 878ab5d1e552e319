"""thermoledger: curate heat-capacity tables into an anchored, auditable coefficient library."""

__version__ = "0.1.0"
