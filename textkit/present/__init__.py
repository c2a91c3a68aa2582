"""Presentation: charts, word clouds and quotes.

Takes the tidy result tables of :mod:`textkit.stats` and :mod:`textkit.discover`
and the coded answers; gives matplotlib figures, laid-out word clouds and
chosen, redacted quotes, never writing files itself (the writers in
:mod:`textkit.io` do). May import every stage below it; matplotlib and
wordcloud load only when a chart is drawn.
"""

from .._lazy import lazy_exports

__getattr__, __dir__ = lazy_exports(__name__, {
    "prevalence_chart": "charts", "differences_chart": "charts", "difference_rows": "charts",
    "keyness_chart": "charts", "keyness_panels": "charts", "cooccurrence_chart": "charts",
    "topic_terms_chart": "charts", "k_selection_chart": "charts",
    "keyness_cloud": "clouds", "frequency_cloud": "clouds", "group_term_frequencies": "clouds",
    "choose_quotes": "quotes", "quotes_markdown": "quotes", "safe_quote": "quotes",
    "load_results": "catalogue", "plan_charts": "catalogue", "draw_chart": "catalogue",
    "render_charts": "catalogue", "ChartText": "style", "place_labels": "labels", "LabelRequest": "labels",
})
