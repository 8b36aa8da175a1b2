"""Pure measurement core: numpy arrays in, plain results out. No I/O, no UI.

scipy is imported lazily (only by ``fit_soak``).
"""

from bringup.analysis.quantities import (
    canonical_unit,
    format_quantity,
    parse_quantity,
    parse_quantity_unit,
)
from bringup.analysis.verdict import Limit, Verdict, judge

__all__ = [
    "Limit",
    "Verdict",
    "canonical_unit",
    "format_quantity",
    "judge",
    "parse_quantity",
    "parse_quantity_unit",
]
