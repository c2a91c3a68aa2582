"""Coverage of the interval methods in a simulated stratified, clustered survey.

Population: two strata of equal size; stratum A holds a share 0.7 p and stratum
B 1.3 p of respondents raising the theme, so the population prevalence is p
(0.02, 0.10, 0.50). The sample puts 70% of the respondents in A and 30% in B
(unequal weights N_h/n_h), multiplies every weight by an independent log-normal
factor (sd 0.3, uninformative), and draws clusters of 5 respondents whose own
prevalence is Beta with mean p_h and intra-cluster correlation 0.05. Each
replication is analysed with textkit's design-based variance (strata + PSUs,
df = #PSU - #strata) and every interval method; a cell reports the share of the
replications whose interval covers p. Replications are stacked as independent
waves of one design, so each keeps its own strata, PSUs and df.

The default publishing rule ``base-width`` (``BASE_WIDTH_RULE``) is applied to every replication:
``cover`` is the coverage over all replications, ``cover|shown`` over the ones
not suppressed, ``suppr`` the share suppressed. A cell is marked ``S`` when most
of its replications are suppressed (an analyst would usually not see them).

Run: ``python benchmarks/coverage.py`` (defaults: --reps 2000, n = 50 ... 2000).
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd

PREVALENCES = (0.02, 0.10, 0.50)
SIZES = (50, 100, 200, 500, 1000, 2000)
CLUSTER_SIZE = 5
ICC = 0.05


def simulate(n: int, reps: int, rng: np.random.Generator) -> pd.DataFrame:
    """``reps`` independent samples of ``n`` respondents, stacked (column ``rep``)."""
    clusters_total = max(n // CLUSTER_SIZE, 4)
    in_a = round(0.7 * clusters_total)
    clusters = {"A": max(in_a, 2), "B": max(clusters_total - in_a, 2)}
    frames = []
    for stratum, n_clusters in clusters.items():
        scale = 0.7 if stratum == "A" else 1.3
        size = n_clusters * CLUSTER_SIZE
        rep = np.repeat(np.arange(reps), size)
        cluster = np.tile(np.repeat(np.arange(n_clusters), CLUSTER_SIZE), reps)
        columns = {"rep": rep, "stratum": stratum, "psu": cluster,
                   # population stratum share 0.5 over sample size: unequal design weights
                   "weight": 0.5 / size * rng.lognormal(0.0, 0.3, rep.size)}
        for j, p in enumerate(PREVALENCES):
            mean = p * scale
            a, b = mean * (1 - ICC) / ICC, (1 - mean) * (1 - ICC) / ICC
            cluster_p = rng.beta(a, b, (reps, n_clusters))
            row_p = cluster_p[rep, cluster]
            columns[f"theme_{j}"] = (rng.random(rep.size) < row_p).astype(np.int8)
        frames.append(pd.DataFrame(columns))
    return pd.concat(frames, ignore_index=True)


def coverage(n: int, reps: int, rng: np.random.Generator, confidence: float = 0.95) -> pd.DataFrame:
    """Coverage per prevalence and method for samples of about ``n``."""
    from scipy import sparse

    from textkit.stats.design import SurveyDesign
    from textkit.stats.estimate import CI_METHODS, DEFAULT_RULE, confidence_interval, domain_totals

    frame = simulate(n, reps, rng)
    design = SurveyDesign.from_frame(frame, "weight", "stratum", "psu", wave="rep", cluster_ids_restart=True)
    themes = [f"theme_{j}" for j in range(len(PREVALENCES))]
    Y = sparse.csr_matrix(frame[themes].to_numpy(dtype=float))
    totals = domain_totals(Y, np.arange(len(frame)), design.wave, design.n_waves, design, diagonal=True)
    df = design.wave_df().astype(float)
    kish = totals.weight ** 2 / totals.weight_sq
    rows = []
    for j, truth in enumerate(PREVALENCES):
        p, v = totals.estimate[:, j], totals.variance[:, j]
        for method in CI_METHODS:
            low, high, _, design_n = confidence_interval(p, v, totals.count, kish, df, method, confidence)
            flags = DEFAULT_RULE.flags(totals.count, p, np.sqrt(v), low, high, df, design_n)
            covered = (low <= truth) & (truth <= high)
            shown = flags != "suppress"
            rows.append({"p": truth, "n": int(totals.count.mean()), "method": method, "cover": covered.mean(),
                         "cover_shown": covered[shown].mean() if shown.any() else np.nan,
                         "suppressed": 1 - shown.mean(), "mean_df": df.mean()})
    return pd.DataFrame(rows)


def markdown(results: pd.DataFrame) -> str:
    """A table: one row per prevalence x n, columns per method (suppression of the default method)."""
    from textkit.stats.estimate import DEFAULT_METHOD

    methods = list(dict.fromkeys(results["method"]))
    head = "| p | n | df | suppr | " + " | ".join(f"{m} cover | {m} cover\\|shown" for m in methods) + " |"
    lines = [head, "|" + "---|" * (4 + 2 * len(methods))]
    for (p, n), cell in results.groupby(["p", "n"], sort=True):
        cell = cell.set_index("method")
        suppressed = cell.loc[DEFAULT_METHOD, "suppressed"]
        mark = " S" if suppressed > 0.5 else ""
        values = " | ".join(f"{cell.loc[m, 'cover']:.3f} | {cell.loc[m, 'cover_shown']:.3f}" for m in methods)
        lines.append(f"| {p:.2f} | {n}{mark} | {cell['mean_df'].iloc[0]:.0f} | {suppressed:.2f} | {values} |")
    return "\n".join(lines)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reps", type=int, default=2000)
    parser.add_argument("--sizes", type=int, nargs="+", default=list(SIZES))
    parser.add_argument("--seed", type=int, default=20261202)
    args = parser.parse_args()
    rng = np.random.default_rng(args.seed)
    start = time.perf_counter()
    results = pd.concat([coverage(n, args.reps, rng) for n in args.sizes], ignore_index=True)
    print(f"{args.reps} replications per cell, seed {args.seed}, {time.perf_counter() - start:.0f} s")
    print(markdown(results))
    from textkit.stats.estimate import DEFAULT_METHOD

    default = results[results["method"] == DEFAULT_METHOD].set_index(["p", "n"])["suppressed"]
    shown = results[results.set_index(["p", "n"]).index.map(default).to_numpy() <= 0.5]
    for method, cell in shown.groupby("method"):
        inside = ((cell["cover"] >= 0.935) & (cell["cover"] <= 0.965)).all()
        low, high = cell["cover"].min(), cell["cover"].max()
        print(f"{method}: coverage in cells not marked S {low:.3f} - {high:.3f} "
              f"({'within' if inside else 'outside'} 0.935-0.965)")


if __name__ == "__main__":
    main()
