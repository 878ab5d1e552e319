"""Effective settings of the stages, with their defaults (one place, recorded in outputs)."""

from dataclasses import asdict, dataclass


@dataclass(frozen=True)
class FitSettings:
    form: str = "nasa7"
    #: conventional breakpoint [K], used when the data straddle it
    breakpoint: float = 1000.0
    #: fewest data points in each fitted range
    min_points_per_range: int = 5
    #: how far [K] the lowest range may be stretched below the data to reach 298.15 K
    max_anchor_extension: float = 100.0

    @property
    def min_points(self) -> int:
        return 2 * self.min_points_per_range

    def to_dict(self) -> dict:
        return asdict(self)
