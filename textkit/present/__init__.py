"""Presentation: charts, word clouds, quotes and reports (to come).

Will take the tidy result tables of :mod:`textkit.stats` and
:mod:`textkit.discover` and the coded answers; will give matplotlib figures,
chosen quotes and report documents, never writing files itself (the writers
in :mod:`textkit.io` do). May import every stage below it.
"""
