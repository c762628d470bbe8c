"""balance-desk's numerical core: the horizontal momentum budget on the sphere.

Pure numpy. The public API:

* :class:`Grid` (``grid``): lat-lon or projected grids, their metrics and
  derivative operators;
* ``winds``: geostrophic, ageostrophic, gradient and thermal wind, vorticity,
  divergence (:class:`Flow`);
* ``budget``: every term of both momentum equations (:func:`momentum_budget`);
* ``numbers``: Rossby, Ekman, Froude, Burger, Richardson, N^2, deformation radius;
* ``scales``: a priori scale analysis, presets, scales estimated from data;
* ``region``: boxes and polygons, area-weighted statistics;
* ``verdict``: imbalance ratios, balance class and sentence.

The xarray edge (reading files) lives in ``balance_core.io`` and is imported
only on request, so the compute modules never pull in xarray.
"""

from .budget import DERIVED, FORCING_TERMS, TERMS, Budget, Fields, Term, momentum_budget
from .grid import Grid, coriolis_parameter
from .region import Region, vector_stats, weighted_stats
from .scales import PRESETS, ScaleSet, analyze_scales, estimate_scales
from .verdict import Thresholds, Verdict, budget_verdict, classify_budget, classify_scales
from .winds import Flow, geostrophic_wind, gradient_wind

__version__ = "0.1.0"

__all__ = [
    "DERIVED",
    "FORCING_TERMS",
    "TERMS",
    "Budget",
    "Fields",
    "Term",
    "momentum_budget",
    "Grid",
    "coriolis_parameter",
    "Region",
    "vector_stats",
    "weighted_stats",
    "PRESETS",
    "ScaleSet",
    "analyze_scales",
    "estimate_scales",
    "Thresholds",
    "Verdict",
    "budget_verdict",
    "classify_budget",
    "classify_scales",
    "Flow",
    "geostrophic_wind",
    "gradient_wind",
]
