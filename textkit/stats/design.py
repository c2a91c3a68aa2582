"""Survey design: weights, strata, clusters (PSUs), finite-population correction.

A :class:`SurveyDesign` is built once from the survey's columns with
:meth:`SurveyDesign.from_frame` and then travels with every estimate. It holds
one row per *unit* (a response), integer codes for strata and PSUs, the
per-stratum variance factors, and the degrees of freedom.

Conventions (all documented choices):

* **No design given.** Every unit is its own PSU in one stratum, with its weight
  (weight 1 when no weight column is given).
* **Strata without clusters.** Every unit is its own PSU inside its stratum.
* **Cluster ids.** With ``cluster_ids_restart=False`` (default) a cluster id names one PSU of the
  whole survey, so the same id in two strata is refused ("clusters not nested in
  strata"). With ``cluster_ids_restart=True`` cluster ids are numbered within each stratum and the
  pair (stratum, cluster) is relabelled as a PSU of its own.
* **Waves.** Waves are independent samples. When ``wave`` is given the strata are
  crossed with the wave (a wave without strata is one stratum) and PSUs never span
  waves, so a pooled estimate treats the waves as strata of one stacked design and
  the covariance between two waves is exactly zero.
* **Finite-population correction.** ``fpc`` holds, per unit, the population size
  ``N_h`` of its stratum (number of population PSUs when there are clusters, of
  population units otherwise), or the sampling fraction ``n_h/N_h`` when every
  value is at most 1. It must be constant within a stratum. The stratum's variance
  factor is ``f_h = 1 - n_h/N_h``.
* **Strata with a single PSU** (``one_cluster_stratum``):

  - ``"refuse"`` (default): refuse the design, naming the stratum.
  - ``"centre"``: the stratum's only PSU contributes ``f_h (z - zbar)^2`` with
    ``zbar`` the mean PSU total over the whole design (common practice, often
    called "adjust"). For linearised ratio scores that mean is exactly 0, so the
    contribution is ``f_h z^2``.
  - ``"merge"``: each single-PSU stratum is merged with the stratum that follows
    it in sorted order of stratum labels within the same wave (the last stratum of
    a wave with the one before it); merging repeats until every merged stratum has
    at least two PSUs. A merged stratum gets no finite-population correction
    (``f_h = 1``, the conservative choice) and is labelled ``"a+b"``.

* **Degrees of freedom** ``df = #PSU - #strata`` of the whole design (``n - 1``
  without a design); per wave, the PSUs and strata of that wave. Domain estimates
  use the df of the design (or wave) they live in, as is common practice.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import DesignError

#: How the survey reader labels a missing wave or group value (textkit.io.readers.MISSING_LABEL).
_MISSING_LABEL = "(missing)"
#: Values of the option's former name ``single_psu`` -> current values.
_OLD_POLICIES = {"error": "refuse", "centre": "centre", "collapse": "merge"}

#: Accepted values of ``one_cluster_stratum``.
ONE_CLUSTER_POLICIES: tuple[str, ...] = ("refuse", "centre", "merge")


@dataclass(frozen=True, eq=False)
class SurveyDesign:
    """A validated survey design over ``n_units`` units (responses).

    Build it with :meth:`from_frame` or :meth:`simple`; the fields are read-only.

    Attributes
    ----------
    weights : ndarray of shape (n_units,)
        Non-negative survey weights.
    stratum : ndarray of int of shape (n_units,)
        Stratum code (0..n_strata-1) of each unit, after wave crossing and collapsing.
    psu : ndarray of int of shape (n_units,)
        PSU code (0..n_psus-1), unique over the whole design.
    psu_stratum : ndarray of int of shape (n_psus,)
        Stratum code of each PSU.
    stratum_psus : ndarray of int of shape (n_strata,)
        Number of sampled PSUs ``n_h`` per stratum.
    stratum_fpc : ndarray of float of shape (n_strata,)
        Variance factor ``f_h`` (1 without a finite-population correction).
    stratum_wave : ndarray of int of shape (n_strata,)
        Wave code of each stratum (all 0 without waves).
    stratum_labels : tuple of str
        Readable label of each stratum code.
    wave : ndarray of int of shape (n_units,) or None
        Wave code of each unit (index into ``wave_labels``).
    wave_labels : tuple
        Sorted wave values (empty without waves).
    ids : tuple or None
        Unit ids (e.g. response ids) in unit order, when built with ``id=``.
    one_cluster_stratum : str
        Policy applied to single-PSU strata.
    columns : dict
        The columns each role was read from (``weight``, ``strata``, ``cluster``,
        ``fpc``, ``wave``, ``id``), None where not used.
    """

    weights: np.ndarray
    stratum: np.ndarray
    psu: np.ndarray
    psu_stratum: np.ndarray
    stratum_psus: np.ndarray
    stratum_fpc: np.ndarray
    stratum_wave: np.ndarray
    stratum_labels: tuple[str, ...]
    wave: np.ndarray | None = None
    wave_labels: tuple[Any, ...] = ()
    ids: tuple[Any, ...] | None = None
    one_cluster_stratum: str = "refuse"
    columns: dict[str, str | None] = field(default_factory=dict)

    # ------------------------------------------------------------------ sizes
    @property
    def n_units(self) -> int:
        """Number of units (responses)."""
        return int(self.weights.shape[0])

    @property
    def n_psus(self) -> int:
        """Number of PSUs in the design."""
        return int(self.psu_stratum.shape[0])

    @property
    def n_strata(self) -> int:
        """Number of strata in the design (after crossing with waves and collapsing)."""
        return int(self.stratum_psus.shape[0])

    @property
    def df(self) -> int:
        """Design degrees of freedom, ``#PSU - #strata``."""
        return self.n_psus - self.n_strata

    @property
    def n_waves(self) -> int:
        """Number of waves (1 without a wave column)."""
        return max(len(self.wave_labels), 1)

    def wave_df(self) -> np.ndarray:
        """Degrees of freedom of each wave's own sample, shape (n_waves,)."""
        psus = np.bincount(self.stratum_wave, weights=self.stratum_psus, minlength=self.n_waves)
        strata = np.bincount(self.stratum_wave, minlength=self.n_waves)
        return (psus - strata).astype(int)

    def variance_factors(self) -> tuple[np.ndarray, np.ndarray]:
        """Per-stratum factors of the with-replacement variance estimator.

        Returns
        -------
        scale : ndarray of shape (n_strata,)
            ``f_h n_h / (n_h - 1)`` (``f_h`` for a single-PSU stratum kept by the
            ``"centre"`` policy).
        centre : ndarray of shape (n_strata,)
            ``scale / n_h``, the weight of the squared stratum total that centres
            PSU totals on their stratum mean (0 for single-PSU strata, which are
            centred on the design mean of the scores, i.e. on 0).

        The variance of a linearised score with PSU totals ``z_c`` is
        ``sum_h scale_h * (sum_{c in h} z_c^2) - centre_h * (sum_{c in h} z_c)^2``.
        """
        n_h = self.stratum_psus.astype(float)
        single = n_h < 2
        scale = np.where(single, self.stratum_fpc, self.stratum_fpc * n_h / np.where(single, 1.0, n_h - 1))
        centre = np.where(single, 0.0, scale / n_h)
        return scale, centre

    # ------------------------------------------------------------ constructors
    @classmethod
    def simple(cls, n_units: int, weights: np.ndarray | None = None) -> SurveyDesign:
        """Design without strata or clusters: every unit is its own PSU.

        Parameters
        ----------
        n_units : int
            Number of units.
        weights : ndarray of shape (n_units,), optional
            Survey weights; all 1 when omitted.
        """
        import pandas as pd

        frame = pd.DataFrame({"_w": np.ones(n_units) if weights is None else np.asarray(weights, float)})
        return cls.from_frame(frame, weight="_w")

    @classmethod
    def from_frame(
        cls,
        frame: Any,
        weight: str | None = None,
        strata: str | None = None,
        cluster: str | None = None,
        fpc: str | None = None,
        one_cluster_stratum: str = "refuse",
        *,
        wave: str | None = None,
        id: str | None = None,  # noqa: A002 - the survey config calls this role "id"
        cluster_ids_restart: bool = False,
        require_clusters: bool = False,
        source: str | None = None,
    ) -> SurveyDesign:
        """Build and validate a design from the survey's columns.

        Parameters
        ----------
        frame : pandas.DataFrame
            One row per unit, or (with ``id``) several rows per unit, e.g. the long
            coded table with one row per response x question.
        weight, strata, cluster, fpc : str, optional
            Column names. No weight: every unit weighs 1.
        one_cluster_stratum : {"refuse", "centre", "merge"}, default "refuse"
            Policy for strata with one PSU (see the module docstring).
        wave : str, optional
            Wave column; waves are independent samples (strata crossed with waves).
        id : str, optional
            Unit id column. Rows sharing an id are one unit and must agree on every
            design column; units are ordered by first appearance.
        cluster_ids_restart : bool, default False
            True when cluster ids are numbered within each stratum.
        require_clusters : bool, default False
            Refuse a design with strata but no cluster column (guards multi-stage
            samples whose cluster column was forgotten, which understates SEs).
        source : str, optional
            File name used in error messages.

        Raises
        ------
        DesignError
            Missing columns; missing, infinite or negative weights; all weights zero;
            missing stratum/cluster/wave values; clusters in several strata (with
            ``cluster_ids_restart=False``); fpc not constant within a stratum or below the sample
            size; a single-PSU stratum under ``"refuse"``; strata without clusters
            under ``require_clusters``; fewer than two PSUs in the design or a wave.
        """
        if one_cluster_stratum not in ONE_CLUSTER_POLICIES:
            raise DesignError(f"one_cluster_stratum must be one of {', '.join(ONE_CLUSTER_POLICIES)}, "
                              f"not '{one_cluster_stratum}'", source=source)
        roles = {"weight": weight, "strata": strata, "cluster": cluster, "fpc": fpc, "wave": wave, "id": id}
        _check_roles(frame, roles, require_clusters, source)
        used = [c for c in (weight, strata, cluster, fpc, wave) if c is not None]
        units = _Units.of(frame, id, used, source)
        weights = units.weights(weight)
        if wave is not None:
            wave_codes, wave_uniques = units.codes(wave, "wave")
            wave_labels: tuple[Any, ...] = tuple(wave_uniques.tolist())
        else:
            wave_codes, wave_labels = np.zeros(units.n, dtype=np.int64), ()
        stratum, stratum_wave, stratum_labels = _strata_by_wave(units, strata, wave_codes, wave_labels)
        psu = _psus(units, cluster, stratum, stratum_labels, wave_codes, max(len(wave_labels), 1),
                    cluster_ids_restart)
        psu_stratum = np.zeros(int(psu.max()) + 1, dtype=np.int64)
        psu_stratum[psu] = stratum
        stratum_psus = np.bincount(psu_stratum, minlength=len(stratum_labels))
        stratum_fpc = _stratum_fpc(units, fpc, stratum, stratum_labels, stratum_psus)
        singles = np.flatnonzero(stratum_psus < 2)
        if singles.size and one_cluster_stratum == "refuse":
            names = ", ".join(f"'{stratum_labels[h]}'" for h in singles[:5])
            more = f" and {singles.size - 5} more" if singles.size > 5 else ""
            raise DesignError(f"stratum {names}{more} has only one PSU, so its variance cannot be estimated; "
                              "merge it with another stratum or choose one_cluster_stratum: centre or merge",
                              source=source, column=strata or cluster)
        if singles.size and one_cluster_stratum == "merge":
            mapping, stratum_labels, stratum_fpc = _collapse(stratum_psus, stratum_wave, stratum_labels,
                                                            stratum_fpc, source=source)
            stratum = mapping[stratum]
            psu_stratum = mapping[psu_stratum]
            stratum_wave = np.array([stratum_wave[np.flatnonzero(mapping == h)[0]]
                                     for h in range(len(stratum_labels))], dtype=np.int64)
            stratum_psus = np.bincount(psu_stratum, minlength=len(stratum_labels))

        design = cls(
            weights=weights, stratum=np.asarray(stratum, dtype=np.int64), psu=psu, psu_stratum=psu_stratum,
            stratum_psus=stratum_psus, stratum_fpc=np.asarray(stratum_fpc, dtype=float),
            stratum_wave=np.asarray(stratum_wave, dtype=np.int64), stratum_labels=tuple(stratum_labels),
            wave=wave_codes.astype(np.int64) if wave is not None else None, wave_labels=wave_labels,
            ids=units.ids, one_cluster_stratum=one_cluster_stratum, columns=dict(roles),
        )
        _check_degrees_of_freedom(design, source, wave)
        return design

    @classmethod
    def from_roles(cls, frame: Any, roles: dict[str, Any], *, id: str | None = None,  # noqa: A002
                   source: str | None = None) -> SurveyDesign:
        """Build the design from a roles mapping (``SurveyConfig.roles()`` or a manifest's ``roles``).

        Manifests written before the design options were renamed (``single_psu``
        with ``error/centre/collapse``, ``nest``) are read too.
        """
        policy = roles.get("one_cluster_stratum") or _OLD_POLICIES.get(roles.get("single_psu"), "refuse")
        restart = roles.get("cluster_ids_restart", roles.get("nest", False))
        id_column = id if id is not None else roles.get("id")
        if id_column is not None and id_column not in frame.columns:
            id_column = "response_id" if "response_id" in frame.columns else None
        return cls.from_frame(frame, roles.get("weight"), roles.get("strata"), roles.get("cluster"),
                              roles.get("fpc"), policy, wave=roles.get("wave"), id=id_column,
                              cluster_ids_restart=bool(restart),
                              require_clusters=bool(roles.get("require_clusters", False)), source=source)

    @classmethod
    def from_config(cls, config: Any, frame: Any, *, id: str | None = None,  # noqa: A002
                    source: str | None = None) -> SurveyDesign:
        """Build the design from a :class:`textkit.io.config.SurveyConfig` and the survey (or coded) frame.

        ``id`` defaults to the config's id column, or ``response_id`` when the
        frame is a coded table.
        """
        return cls.from_roles(frame, config.roles(), id=id, source=source or str(config.survey))

    def __repr__(self) -> str:
        weights = "weighted" if self.columns.get("weight") else "unweighted"
        waves = f", {len(self.wave_labels)} waves" if self.wave_labels else ""
        return (f"<SurveyDesign: {self.n_units} responses, {weights}, {self.n_strata} strata, "
                f"{self.n_psus} PSUs, df {self.df}{waves}>")

    def unit_index(self, ids: Any) -> np.ndarray:
        """Positions of ``ids`` among the design's unit ids, shape (len(ids),); -1 if absent."""
        import pandas as pd

        if self.ids is None:
            raise DesignError("the design was built without an id column, so rows cannot be matched to "
                              "responses; build it with SurveyDesign.from_frame(..., id=...)")
        return pd.Index(self.ids).get_indexer(pd.Index(ids))


def _collapse(stratum_psus: np.ndarray, stratum_wave: np.ndarray, labels: list[str],
              fpc: np.ndarray, source: str | None) -> tuple[np.ndarray, list[str], np.ndarray]:
    """Merge single-PSU strata with their successor within the same wave.

    Strata codes are already sorted by (wave, label), so "the next stratum" is the
    next code of the same wave; the last stratum of a wave merges into the group
    before it. Returns the old-to-new code map, new labels and new fpc factors.
    """
    groups: list[list[int]] = []
    for w in np.unique(stratum_wave):
        members = np.flatnonzero(stratum_wave == w).tolist()
        wave_groups: list[list[int]] = []
        pending: list[int] = []
        for h in members:
            pending.append(h)
            if stratum_psus[pending].sum() >= 2:
                wave_groups.append(pending)
                pending = []
        if pending:
            if not wave_groups:
                raise DesignError(f"cannot collapse stratum '{labels[pending[0]]}': its wave has no other "
                                  "stratum with a PSU to merge with", source=source)
            wave_groups[-1].extend(pending)
        groups.extend(wave_groups)
    mapping = np.empty(len(labels), dtype=np.int64)
    new_labels: list[str] = []
    new_fpc = np.ones(len(groups))
    for code, members in enumerate(groups):
        mapping[members] = code
        new_labels.append("+".join(labels[h] for h in members))
        if len(members) == 1:
            new_fpc[code] = fpc[members[0]]
    return mapping, new_labels, new_fpc


# --------------------------------------------------------------------------- steps of from_frame

def _check_roles(frame: Any, roles: dict[str, str | None], require_clusters: bool, source: str | None) -> None:
    """Every named column exists; strata without clusters only when clusters are not required."""
    for role, column in roles.items():
        if column is not None and column not in frame.columns:
            raise DesignError(f"the {role} column is not in the data; columns are: "
                              f"{', '.join(map(str, frame.columns[:20]))}", source=source, column=column)
    if require_clusters and roles["strata"] is not None and roles["cluster"] is None:
        raise DesignError("the design has strata but no cluster column, and clusters are required; "
                          "name the PSU column (design: cluster:) or turn off require_clusters",
                          source=source, column=roles["strata"])


@dataclass
class _Units:
    """The design's units (one row each) and where each came from in the frame, for messages."""

    frame: Any
    rows: np.ndarray
    ids: tuple[Any, ...] | None
    source: str | None

    @property
    def n(self) -> int:
        return len(self.frame)

    def row_of(self, position: int) -> int:
        """1-based data row of the unit at ``position``."""
        return int(self.rows[position]) + 1

    @classmethod
    def of(cls, frame: Any, id_column: str | None, used: list[str], source: str | None) -> _Units:
        """One unit per row, or (with an id column) per id, its design values agreeing on every row."""
        import pandas as pd

        rows = np.arange(len(frame))
        if id_column is None:
            units = cls(frame, rows, None, source)
        else:
            ids_all = frame[id_column]
            if ids_all.isna().any():
                bad = int(np.flatnonzero(ids_all.isna().to_numpy())[0])
                raise DesignError("the id is missing", source=source, row=bad + 1, column=id_column)
            codes, uniques = pd.factorize(ids_all, sort=False)
            first = np.full(len(uniques), len(frame), dtype=np.int64)
            np.minimum.at(first, codes, rows)
            for column in dict.fromkeys(used):
                values = frame[column].to_numpy()
                reference = values[first][codes]
                same = (reference == values) | (pd.isna(reference) & pd.isna(values))
                if not np.all(same):
                    bad = int(np.flatnonzero(~same)[0])
                    raise DesignError(f"the {column} value differs between rows of response "
                                      f"'{uniques[codes[bad]]}'; design columns must be the same on every "
                                      f"row of a response", source=source, row=bad + 1, column=column)
            units = cls(frame.iloc[first], first, tuple(uniques), source)
        if units.n == 0:
            raise DesignError("the survey has no responses", source=source)
        return units

    def weights(self, column: str | None) -> np.ndarray:
        """Finite, non-negative weights with at least one positive (all 1 without a column)."""
        import pandas as pd

        if column is None:
            return np.ones(self.n)
        raw = pd.to_numeric(self.frame[column], errors="coerce").to_numpy(dtype=float)
        bad = ~np.isfinite(raw)
        if bad.any():
            pos = int(np.flatnonzero(bad)[0])
            value = self.frame[column].iloc[pos]
            raise DesignError(f"the weight is missing or not a finite number ('{value}'); "
                              "every response needs a weight of 0 or more", source=self.source,
                              row=self.row_of(pos), column=column)
        if (raw < 0).any():
            pos = int(np.flatnonzero(raw < 0)[0])
            raise DesignError(f"the weight is negative ({raw[pos]:g}); weights must be 0 or more",
                              source=self.source, row=self.row_of(pos), column=column)
        if not (raw > 0).any():
            raise DesignError("every weight is 0; at least one response needs a positive weight",
                              source=self.source, column=column)
        return raw

    def codes(self, column: str, role: str) -> tuple[np.ndarray, Any]:
        """Sorted integer codes of a design column; a missing value is refused with its rows."""
        import pandas as pd

        values = self.frame[column]
        missing = (values.isna() | (values.astype(object) == _MISSING_LABEL)).to_numpy()
        if missing.any():
            positions = np.flatnonzero(missing)
            rows = ", ".join(str(self.row_of(int(p))) for p in positions[:5]) + (", ..." if positions.size > 5 else "")
            fix = "; give them a wave, or leave them out (--drop-missing-wave)" if role == "wave" else ""
            raise DesignError(f"the {role} value is missing for {positions.size} response(s), in rows "
                              f"{rows}; every response needs one{fix}",
                              source=self.source, row=self.row_of(int(positions[0])), column=column)
        return pd.factorize(values, sort=True)


def _strata_by_wave(units: _Units, strata: str | None, wave_codes: np.ndarray, wave_labels: tuple[Any, ...]
                    ) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """(stratum per unit, wave per stratum, stratum labels): strata crossed with waves."""
    import pandas as pd

    if strata is not None:
        raw_strata, strata_uniques = units.codes(strata, "stratum")
        strata_names = [str(v) for v in strata_uniques.tolist()]
    else:
        raw_strata = np.zeros(units.n, dtype=np.int64)
        strata_names = ["(all)"]
    combined = wave_codes.astype(np.int64) * len(strata_names) + raw_strata
    stratum, stratum_keys = pd.factorize(combined, sort=True)
    stratum_keys = np.asarray(stratum_keys, dtype=np.int64)
    stratum_wave = stratum_keys // len(strata_names)
    stratum_labels = [
        (f"{wave_labels[w]}/" if wave_labels else "") + strata_names[s]
        for w, s in zip(stratum_wave, stratum_keys % len(strata_names), strict=True)
    ]
    return stratum, stratum_wave, stratum_labels


def _psus(units: _Units, cluster: str | None, stratum: np.ndarray, stratum_labels: list[str],
          wave_codes: np.ndarray, n_waves: int, cluster_ids_restart: bool) -> np.ndarray:
    """PSU index per unit (every unit its own PSU without a cluster column)."""
    import pandas as pd

    if cluster is None:
        return np.arange(units.n, dtype=np.int64)
    cluster_codes, cluster_uniques = units.codes(cluster, "cluster")
    if not cluster_ids_restart:
        # one stratum per cluster id within a wave, or the clusters are not nested
        # (a cluster id met again in another wave is a new PSU: waves are independent)
        in_wave = wave_codes.astype(np.int64) * len(cluster_uniques) + cluster_codes
        first_stratum = np.full(n_waves * len(cluster_uniques), -1, dtype=np.int64)
        first_stratum[in_wave[::-1]] = stratum[::-1]
        clash = first_stratum[in_wave] != stratum
        if clash.any():
            pos = int(np.flatnonzero(clash)[0])
            other = stratum_labels[first_stratum[in_wave[pos]]]
            name = cluster_uniques[cluster_codes[pos]]
            raise DesignError(
                f"clusters are not nested in strata: cluster '{name}' is in stratum '{other}' "
                f"and in stratum '{stratum_labels[stratum[pos]]}'; if cluster "
                "ids are numbered within each stratum, set cluster_ids_restart: true",
                source=units.source, row=units.row_of(pos), column=cluster)
    pair = stratum.astype(np.int64) * (int(cluster_codes.max()) + 1) + cluster_codes
    psu, _ = pd.factorize(pair, sort=True)
    return np.asarray(psu, dtype=np.int64)


def _stratum_fpc(units: _Units, fpc: str | None, stratum: np.ndarray, stratum_labels: list[str],
                 stratum_psus: np.ndarray) -> np.ndarray:
    """Finite-population correction factor 1 - n_h/N_h per stratum (all 1 without an fpc column)."""
    import pandas as pd

    n_strata = len(stratum_labels)
    if fpc is None:
        return np.ones(n_strata)
    values = pd.to_numeric(units.frame[fpc], errors="coerce").to_numpy(dtype=float)
    bad = ~np.isfinite(values) | (values <= 0)
    if bad.any():
        pos = int(np.flatnonzero(bad)[0])
        raise DesignError("the finite-population correction must be a positive number "
                          "(population size N_h, or sampling fraction n_h/N_h)",
                          source=units.source, row=units.row_of(pos), column=fpc)
    per_stratum = np.full(n_strata, np.nan)
    per_stratum[stratum] = values
    differs = per_stratum[stratum] != values
    if differs.any():
        pos = int(np.flatnonzero(differs)[0])
        raise DesignError(f"the finite-population correction differs within stratum "
                          f"'{stratum_labels[stratum[pos]]}'; it must be one value per stratum",
                          source=units.source, row=units.row_of(pos), column=fpc)
    if np.all(values <= 1):
        return 1.0 - per_stratum
    if (per_stratum < stratum_psus).any():
        h = int(np.flatnonzero(per_stratum < stratum_psus)[0])
        pos = int(np.flatnonzero(stratum == h)[0])
        raise DesignError(f"stratum '{stratum_labels[h]}' has population size "
                          f"{per_stratum[h]:g} but {stratum_psus[h]} sampled PSUs; the "
                          "population size cannot be smaller than the sample", source=units.source,
                          row=units.row_of(pos), column=fpc)
    return 1.0 - stratum_psus / per_stratum


def _check_degrees_of_freedom(design: SurveyDesign, source: str | None, wave: str | None) -> None:
    """At least two PSUs, and at least one degree of freedom in every wave."""
    n_waves = max(len(design.wave_labels), 1)
    psus_per_wave = np.bincount(design.stratum_wave, weights=design.stratum_psus, minlength=n_waves)
    if design.n_psus < 2:
        raise DesignError("the design has fewer than two PSUs, so no variance can be estimated",
                          source=source)
    if (design.wave_df() < 1).any() or (psus_per_wave < 2).any():
        w = int(np.flatnonzero((design.wave_df() < 1) | (psus_per_wave < 2))[0])
        where = f"wave '{design.wave_labels[w]}'" if design.wave_labels else "the design"
        raise DesignError(f"{where} has no degrees of freedom (#PSU - #strata < 1), so no variance can "
                          "be estimated; collapse strata or add PSUs", source=source, column=wave)

