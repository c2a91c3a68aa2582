"""Survey statistics: the design, weighted prevalence, comparisons and tests.

Takes a coded table (one row per response, 0/1 theme columns) and a
:class:`SurveyDesign` (weights, strata, clusters, fpc); gives tidy tables of
prevalence with design-based intervals and publishing flags, group and wave
comparisons, Rao-Scott tests and BH q-values. Imports only :mod:`textkit.errors`.
"""

from .._lazy import lazy_exports

__getattr__, __dir__ = lazy_exports(__name__, {
    "SurveyDesign": "design",
    "analyse": "estimate", "prevalence": "estimate", "compare_groups": "estimate", "compare_waves": "estimate",
    "group_tests": "estimate", "crosstab": "crosstab", "Crosstab": "crosstab",
    "ReliabilityRule": "rules", "BASE_WIDTH_RULE": "rules", "RULES": "rules",
    "rogan_gladen": "misclassification",
})
