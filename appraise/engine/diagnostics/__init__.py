"""Model checking: influence, collinearity, residual tests, cross-validation, ratio study.

``diagnose(fit, settings)`` runs all of it over a fitted model; ``compare_models``
sets candidate models side by side. The submodules hold the pieces on plain arrays.
"""

from .checkup import Diagnostics, diagnose, diagnose_arrays
from .collinearity import TermGroupRef
from .compare import Comparison, ModelRow, compare_models
from .influence import Finding, SaleFlag
from .ratio_study import IAAO_2013_MEASURES, Measure, MeasureValue, ratio_study
from .settings import DiagnosticSettings

__all__ = [
    "IAAO_2013_MEASURES",
    "Comparison",
    "DiagnosticSettings",
    "Diagnostics",
    "Finding",
    "Measure",
    "MeasureValue",
    "ModelRow",
    "SaleFlag",
    "TermGroupRef",
    "compare_models",
    "diagnose",
    "diagnose_arrays",
    "ratio_study",
]
