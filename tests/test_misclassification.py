"""Rogan-Gladen correction of a coded prevalence for the coder's error."""

import numpy as np
import pytest

from textkit.stats.misclassification import rogan_gladen


def test_hand_check_rogan_gladen_1978():
    # p = (p_obs + Sp - 1) / (Se + Sp - 1): Rogan & Gladen (1978, Am. J. Epidemiol. 107);
    # p_obs 0.30, Se 0.80, Sp 0.90 -> 0.20 / 0.70 = 0.285714 [computed by hand from the formula]
    result = rogan_gladen(0.30, 0.0, 80, 20, 90, 10)
    assert result.sensitivity == pytest.approx(0.80)
    assert result.specificity == pytest.approx(0.90)
    assert result.estimate == pytest.approx(0.285714, abs=1e-6)
    assert result.reason == ""


def test_delta_method_variance_matches_a_numerical_gradient():
    # Delta method: Var(p) ~ g' Sigma g with g the gradient of p(p_obs, Se, Sp) (common practice);
    # checked against a central-difference gradient rather than the closed form it is written in.
    p_obs, v_obs, tp, fn, tn, fp = 0.30, 0.0004, 160, 40, 540, 60
    se, sp = tp / (tp + fn), tn / (tn + fp)

    def corrected(a, b, c):
        return (a + c - 1) / (b + c - 1)

    h = 1e-6
    gradient = np.array([(corrected(p_obs + h, se, sp) - corrected(p_obs - h, se, sp)) / (2 * h),
                         (corrected(p_obs, se + h, sp) - corrected(p_obs, se - h, sp)) / (2 * h),
                         (corrected(p_obs, se, sp + h) - corrected(p_obs, se, sp - h)) / (2 * h)])
    covariance = np.diag([v_obs, se * (1 - se) / (tp + fn), sp * (1 - sp) / (tn + fp)])
    expected = np.sqrt(gradient @ covariance @ gradient)
    result = rogan_gladen(p_obs, v_obs, tp, fn, tn, fp)
    assert result.se == pytest.approx(expected, rel=1e-6)
    assert result.ci_low == pytest.approx(result.estimate - 1.959964 * expected, rel=1e-5)


def test_refused_with_a_reason_when_the_coder_is_no_better_than_chance():
    result = rogan_gladen([0.3, 0.3, 0.3], [0.0, 0.0, 0.0], [5, 50, 0], [5, 50, 0], [40, 90, 9], [60, 10, 1])
    assert np.isnan(result.estimate[0]) and "<= 1" in result.reason[0]   # Se 0.5 + Sp 0.4 = 0.9
    assert result.reason[1] == "" and np.isfinite(result.estimate[1])
    assert np.isnan(result.estimate[2]) and "sensitivity unknown" in result.reason[2]


def test_clipped_to_the_unit_interval_and_broadcast():
    result = rogan_gladen(np.array([[0.01], [0.99]]), 0.0, [80, 90], [20, 10], [90, 95], [10, 5])
    assert result.estimate.shape == (2, 2)
    assert (result.estimate >= 0).all() and (result.estimate <= 1).all()
    assert result.estimate[0, 0] == 0.0


def _simulate(reps: int, prevalence: float, sensitivity: float, specificity: float, n_survey: int,
              n_validation: int, seed: int) -> tuple[float, float, float]:
    """A constructed population: true labels with a known prevalence, a coder with known Se and Sp.

    Each replication draws a survey sample (coded only) and an independent hand-coded sample
    (true label and code); returns (mean corrected estimate, coverage of the 95% interval, mean raw).
    """
    rng = np.random.default_rng(seed)
    truth_survey = rng.random((reps, n_survey)) < prevalence
    coded_survey = np.where(truth_survey, rng.random((reps, n_survey)) < sensitivity,
                            rng.random((reps, n_survey)) >= specificity)
    p_obs = coded_survey.mean(axis=1)
    v_obs = p_obs * (1 - p_obs) / (n_survey - 1)
    truth_hand = rng.random((reps, n_validation)) < prevalence
    coded_hand = np.where(truth_hand, rng.random((reps, n_validation)) < sensitivity,
                          rng.random((reps, n_validation)) >= specificity)
    tp = (truth_hand & coded_hand).sum(axis=1)
    fn = (truth_hand & ~coded_hand).sum(axis=1)
    tn = (~truth_hand & ~coded_hand).sum(axis=1)
    fp = (~truth_hand & coded_hand).sum(axis=1)
    result = rogan_gladen(p_obs, v_obs, tp, fn, tn, fp)
    covered = (result.ci_low <= prevalence) & (prevalence <= result.ci_high)
    return float(np.nanmean(result.estimate)), float(np.nanmean(covered)), float(p_obs.mean())


def test_unbiased_and_covers_on_a_constructed_population_small():
    # the small CI version of the simulation below: 400 replications
    mean, coverage, raw = _simulate(400, 0.20, 0.80, 0.90, 2000, 1000, seed=7)
    assert abs(raw - 0.24) < 0.005          # the raw coded share is biased: 0.8*0.2 + 0.1*0.8 = 0.24
    assert abs(mean - 0.20) < 0.005          # the corrected one is not
    assert 0.91 <= coverage <= 0.985         # binomial MC error at 400 reps: sd ~ 0.011


@pytest.mark.slow
@pytest.mark.parametrize("prevalence, sensitivity, specificity, n_validation", [
    (0.20, 0.80, 0.90, 1000), (0.10, 0.70, 0.95, 600), (0.35, 0.90, 0.85, 400), (0.05, 0.85, 0.97, 2000)])
def test_unbiased_and_covers_on_a_constructed_population(prevalence, sensitivity, specificity, n_validation):
    mean, coverage, _ = _simulate(5000, prevalence, sensitivity, specificity, 3000, n_validation, seed=11)
    assert abs(mean - prevalence) < 0.003
    assert 0.93 <= coverage <= 0.965         # nominal 0.95; MC sd ~ 0.003
