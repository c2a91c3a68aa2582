"""Speed of the prevalence table against samplics' TaylorEstimator looped over themes.

Simulates N responses x THEMES themes x GROUPS groups in a stratified clustered
design (20 strata, 50 PSUs each by default), times textkit's whole table
(prevalence with SEs and intervals for every theme x group and the total,
plus pairwise/rest comparisons and Rao-Scott tests), then times samplics'
``TaylorEstimator`` (proportion, stratum + psu, domain = group) on the first
``--samplics-themes`` themes and scales its time linearly to all themes. Prints
both times, the ratio and the largest absolute difference in estimates, SEs and
logit intervals over the themes both computed.

Run: ``python benchmarks/statistics.py`` (defaults: --n 1000000 --themes 50
--groups 10 --samplics-themes 2).
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
import pandas as pd


def simulate(n: int, n_themes: int, n_groups: int, n_strata: int, psus_per_stratum: int,
             seed: int) -> pd.DataFrame:
    """A coded table: one question, 0/1 theme columns, weights, strata, PSUs, one group variable."""
    rng = np.random.default_rng(seed)
    stratum = rng.integers(0, n_strata, n)
    psu = stratum * psus_per_stratum + rng.integers(0, psus_per_stratum, n)
    weight = rng.lognormal(0.0, 0.5, n) * (1 + stratum % 3)
    group = rng.integers(0, n_groups, n)
    prevalence = rng.uniform(0.02, 0.5, n_themes)
    psu_effect = rng.normal(0, 0.4, (n_strata * psus_per_stratum, 1))
    logit = np.log(prevalence / (1 - prevalence))[None, :] + psu_effect[psu] + 0.1 * group[:, None]
    themes = (rng.random((n, n_themes)) < 1 / (1 + np.exp(-logit))).astype(np.int8)
    frame = pd.DataFrame(themes, columns=[f"theme_{j:02d}" for j in range(n_themes)])
    frame.insert(0, "response_id", np.arange(n))
    frame.insert(1, "question", "visit")
    frame.insert(2, "answered", 1)
    frame["weight"] = weight
    frame["stratum"] = stratum
    frame["psu"] = psu
    frame["group"] = np.asarray([f"g{g:02d}" for g in range(n_groups)])[group]
    return frame


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=1_000_000)
    parser.add_argument("--themes", type=int, default=50)
    parser.add_argument("--groups", type=int, default=10)
    parser.add_argument("--strata", type=int, default=20)
    parser.add_argument("--psus", type=int, default=50, help="PSUs per stratum")
    parser.add_argument("--samplics-themes", type=int, default=2)
    parser.add_argument("--seed", type=int, default=20261202)
    args = parser.parse_args()

    from textkit.stats.design import SurveyDesign
    from textkit.stats.estimate import analyse

    frame = simulate(args.n, args.themes, args.groups, args.strata, args.psus, args.seed)
    themes = [c for c in frame.columns if c.startswith("theme_")]
    print(f"{args.n:,} responses x {len(themes)} themes x {args.groups} groups, "
          f"{args.strata} strata x {args.psus} PSUs")

    start = time.perf_counter()
    design = SurveyDesign.from_frame(frame, "weight", "stratum", "psu", id="response_id")
    analysis = analyse(frame, themes, design, groups=["group"], method="logit")
    table = analysis.prevalence()
    prevalence_time = time.perf_counter() - start
    comparisons = analysis.comparisons()
    tests = analysis.group_tests()
    total_time = time.perf_counter() - start
    print(f"textkit: design + prevalence table ({len(table):,} rows) {prevalence_time:.2f} s; "
          f"with comparisons ({len(comparisons):,}) and Rao-Scott tests ({len(tests):,}) {total_time:.2f} s")

    warnings.simplefilter("ignore")
    from samplics.estimation import TaylorEstimator
    from samplics.utils.types import PopParam

    few = themes[:args.samplics_themes]
    start = time.perf_counter()
    reference = []
    for theme in few:
        estimator = TaylorEstimator(PopParam.prop, ciprop_method="logit")
        estimator.estimate(y=frame[theme].to_numpy(), samp_weight=frame["weight"].to_numpy(),
                           stratum=frame["stratum"].to_numpy(), psu=frame["psu"].to_numpy(),
                           domain=frame["group"].to_numpy())
        for group in estimator.point_est:
            reference.append((theme, group, estimator.point_est[group][1], estimator.stderror[group][1],
                              estimator.lower_ci[group][1], estimator.upper_ci[group][1]))
    samplics_time = (time.perf_counter() - start) * len(themes) / len(few)
    ref = pd.DataFrame(reference, columns=["theme", "group", "estimate", "se", "ci_low", "ci_high"])
    ours = table[(table["group_var"] == "group") & (table["wave"] == "(all)")]
    merged = ref.merge(ours, on=["theme", "group"], suffixes=("_ref", ""))
    assert len(merged) == len(ref), "every samplics estimate should have a textkit row"
    difference = max(float(np.abs(merged[f"{c}_ref"] - merged[c]).max())
                     for c in ("estimate", "se", "ci_low", "ci_high"))
    print(f"samplics TaylorEstimator looped over themes: {samplics_time:.1f} s for {len(themes)} themes "
          f"(timed on {len(few)}, scaled linearly)")
    print(f"ratio samplics / textkit prevalence table: {samplics_time / prevalence_time:.0f}x "
          f"(against the whole run with comparisons and tests: {samplics_time / total_time:.0f}x)")
    print(f"max abs difference (estimate, se, logit ci) over {len(merged)} theme x group estimates: "
          f"{difference:.2e}")


if __name__ == "__main__":
    main()
