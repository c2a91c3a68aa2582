"""Fixtures shared by several test modules."""

from __future__ import annotations

import pytest


@pytest.fixture(scope="session")
def crafted_report(tmp_path_factory):
    """The report of the crafted hostile survey (tests/report_fixtures.py), built and written once:
    (config path, SurveyReport, output folder)."""
    from report_fixtures import write_crafted_survey

    from textkit.pipeline import build_report, write_report

    folder = tmp_path_factory.mktemp("crafted")
    config = write_crafted_survey(folder)
    report = build_report(config, summaries="market")
    write_report(report, folder / "report")
    return config, report, folder / "report"
