"""matplotlib plots of scan Datasets (Dataset -> Axes): curves, forces, method
comparisons and SAPT0 components."""

from .comparison import plot_comparison
from .components import plot_components
from .curves import LEVEL_COLOURS, plot_curves, plot_forces
from .maps import plot_map
from .site_fits import plot_site_fit
from .study import plot_category_bars, plot_error_distribution, plot_error_map

__all__ = ["LEVEL_COLOURS", "plot_comparison", "plot_components", "plot_curves", "plot_forces",
           "plot_category_bars", "plot_error_distribution", "plot_error_map", "plot_map", "plot_site_fit"]
