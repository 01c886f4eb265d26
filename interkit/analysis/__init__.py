"""Analysis of scan Datasets: minima and force zeros, curve fits, comparison statistics."""

from .minima import (
    CurveMinimum,
    derivative_force,
    find_minimum,
    finite_sorted,
    force_zero_crossing,
    minimum_table,
)

__all__ = ["CurveMinimum", "derivative_force", "find_minimum", "finite_sorted", "force_zero_crossing",
           "minimum_table"]
