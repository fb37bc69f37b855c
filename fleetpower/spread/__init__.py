"""The spread of a production run: part tolerances, the mains band and capacitor ageing.

- :mod:`.tolerance` reads tolerance declarations and holds the part-class defaults.
- :mod:`.sampling` draws Monte Carlo samples (seeded per sample index) and corners.
- :mod:`.ageing` gives the series capacitor's capacitance over years of service and the
  charge-pump limit of a half-wave dropper.
- :mod:`.statistics` keeps per-sample scalars and reports percentiles and failure
  fractions.
"""

from .ageing import capacitance_at_year_f, charge_pump_current_a, loss_rate_per_year
from .sampling import MAX_CORNERS, corner_values, monte_carlo_values, sample_uniforms
from .statistics import SpreadStatistics
from .tolerance import (
    PART_CLASS_DEFAULTS,
    TOLERANCE_KEYS,
    PartSpread,
    default_spreads,
    mains_band_spreads,
    parse_band,
    read_toleranced,
    split_tolerances,
)

__all__ = [
    "MAX_CORNERS",
    "PART_CLASS_DEFAULTS",
    "TOLERANCE_KEYS",
    "PartSpread",
    "SpreadStatistics",
    "capacitance_at_year_f",
    "charge_pump_current_a",
    "corner_values",
    "default_spreads",
    "loss_rate_per_year",
    "mains_band_spreads",
    "monte_carlo_values",
    "parse_band",
    "read_toleranced",
    "sample_uniforms",
    "split_tolerances",
]
