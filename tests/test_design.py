"""SurveyDesign: construction, conventions and precise errors."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from textkit.errors import DesignError
from textkit.stats.design import SurveyDesign


def frame() -> pd.DataFrame:
    return pd.DataFrame({
        "response_id": ["r1", "r2", "r3", "r4", "r5", "r6"],
        "weight": [1.0, 2.0, 1.5, 1.0, 3.0, 2.0],
        "stratum": ["north", "north", "north", "south", "south", "south"],
        "psu": [1, 1, 2, 1, 2, 2],
    })


def test_no_design_every_response_is_its_own_psu():
    # Binder (1983) / common practice: without clusters, units are the PSUs; df = n - 1
    design = SurveyDesign.simple(5)
    assert design.n_psus == 5 and design.n_strata == 1 and design.df == 4
    assert np.all(design.weights == 1)
    scale, centre = design.variance_factors()
    assert scale[0] == pytest.approx(5 / 4) and centre[0] == pytest.approx(1 / 4)


def test_nested_cluster_ids_are_relabelled_per_stratum():
    design = SurveyDesign.from_frame(frame(), "weight", "stratum", "psu", cluster_ids_restart=True)
    assert design.n_psus == 4 and design.n_strata == 2 and design.df == 2
    assert list(design.stratum_psus) == [2, 2]


def test_clusters_not_nested_in_strata_is_refused_with_the_row():
    with pytest.raises(DesignError, match="not nested in strata") as error:
        SurveyDesign.from_frame(frame(), "weight", "stratum", "psu")
    assert error.value.column == "psu" and error.value.row == 4


@pytest.mark.parametrize("bad, word", [(np.nan, "missing"), (-1.0, "negative")])
def test_bad_weights_name_row_and_column(bad, word):
    data = frame()
    data.loc[2, "weight"] = bad
    with pytest.raises(DesignError, match=word) as error:
        SurveyDesign.from_frame(data, "weight", "stratum", "psu", cluster_ids_restart=True)
    assert error.value.row == 3 and error.value.column == "weight"


def test_single_psu_stratum_policies():
    data = frame()
    data["psu"] = [1, 2, 3, 4, 4, 4]          # south has one PSU
    with pytest.raises(DesignError, match="'south' has only one PSU"):
        SurveyDesign.from_frame(data, "weight", "stratum", "psu")
    centred = SurveyDesign.from_frame(data, "weight", "stratum", "psu", one_cluster_stratum="centre")
    scale, centre = centred.variance_factors()
    assert centred.n_strata == 2 and scale[1] == 1.0 and centre[1] == 0.0
    collapsed = SurveyDesign.from_frame(data, "weight", "stratum", "psu", one_cluster_stratum="merge")
    assert collapsed.n_strata == 1 and collapsed.stratum_labels == ("north+south",)
    assert collapsed.df == 4 - 1


def test_strata_without_clusters_when_clusters_are_required():
    with pytest.raises(DesignError, match="no cluster column"):
        SurveyDesign.from_frame(frame(), "weight", "stratum", require_clusters=True)
    # not required: each response is its own PSU inside its stratum
    design = SurveyDesign.from_frame(frame(), "weight", "stratum")
    assert design.n_psus == 6 and design.df == 4


def test_long_table_is_reduced_to_responses_and_must_agree():
    data = frame()
    long = pd.concat([data.assign(question="a"), data.assign(question="b")], ignore_index=True)
    design = SurveyDesign.from_frame(long, "weight", "stratum", "psu", id="response_id", cluster_ids_restart=True)
    assert design.n_units == 6 and design.ids == tuple(data["response_id"])
    long.loc[7, "weight"] = 9.0
    with pytest.raises(DesignError, match="differs between rows of response 'r2'"):
        SurveyDesign.from_frame(long, "weight", "stratum", "psu", id="response_id", cluster_ids_restart=True)


def test_fpc_population_sizes_and_errors():
    data = frame()
    data["population"] = [10, 10, 10, 4, 4, 4]
    design = SurveyDesign.from_frame(data, "weight", "stratum", "psu", "population", cluster_ids_restart=True)
    # f_h = 1 - n_h / N_h (Wolter 2007): 2 of 10 and 2 of 4 PSUs sampled
    assert design.stratum_fpc == pytest.approx([0.8, 0.5])
    data.loc[5, "population"] = 5
    with pytest.raises(DesignError, match="differs within stratum"):
        SurveyDesign.from_frame(data, "weight", "stratum", "psu", "population", cluster_ids_restart=True)


def test_waves_are_crossed_with_strata():
    data = pd.concat([frame().assign(wave=2025), frame().assign(wave=2026)], ignore_index=True)
    design = SurveyDesign.from_frame(data, "weight", "stratum", "psu", wave="wave", cluster_ids_restart=True)
    assert design.n_strata == 4 and design.n_psus == 8
    assert list(design.wave_df()) == [2, 2] and design.df == 4


def test_missing_column_and_unknown_policy():
    with pytest.raises(DesignError, match="not in the data") as error:
        SurveyDesign.from_frame(frame(), "wt")
    assert error.value.column == "wt"
    with pytest.raises(DesignError, match="one_cluster_stratum must be one of"):
        SurveyDesign.from_frame(frame(), one_cluster_stratum="skip")
