"""The entry point of a learning-curve campaign: define, run (or resume), reload, fit and plan.

>>> import manireg.curves.campaign as st                                          # doctest: +SKIP
>>> campaign = st.Campaign(X=X, y=y, sizes=[256, 512, 1024, 2048], repeats=5,
...                  learners=["net", "knn"], store="results/campaign.sqlite")       # doctest: +SKIP
>>> result = campaign.run(executor="processes", n_jobs=2)                          # doctest: +SKIP
>>> result.fit("net")                                                           # doctest: +SKIP

Running again with the same settings and store finishes only what is missing; a changed setting makes new
cells (new keys) and never reuses rows computed under the old one.

References
----------
.. [1] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).
.. [2] J. Hestness et al., arXiv:1712.00409 (2017).
"""

from __future__ import annotations

import dataclasses

import json
import os
import tempfile

import numpy as np
from dataclasses import dataclass, field

from manireg._results import ResultMixin
from manireg.curves.execution import run_cells
from manireg.curves.floors import DEFAULT_FLOOR, choose_floor
from manireg.curves.store import ResultStore
from manireg.curves.sweep import CampaignSpec, expand, prepare

__all__ = ["Campaign", "CampaignResult"]


@dataclass
class CampaignResult(ResultMixin):
    """Rows of a finished (or partly finished) campaign with what is needed to read them.

    Attributes
    ----------
    rows : pandas.DataFrame
        One row per cell (columns :data:`manireg.curves.sweep.ROW_COLUMNS`).
    spec : dict
        The campaign settings (:meth:`CampaignSpec.to_dict`).
    dimension, smoothness : float
        Intrinsic dimension d and Hölder smoothness s the campaign used.
    ambient_dim : int
        Ambient dimension D.
    name : str
        Campaign name in the store.
    store_path : str
        Where the rows live.
    noise_variance : float or None
        Known label-noise variance (synthetic data), else None.
    noise_estimate : float or None
        Label-noise variance estimated from the data outside the test set
        (:func:`manireg.curves.noise.noise_variance`, Gamma test); the floor of ``floor="estimate"`` fits.
    noise_estimate_interval : tuple or None
        Its interval (from the power-law extrapolation up to the straight-line one, widened by the
        jackknife); a fit's floor carries it into the exponent's interval and the verdict.
    dimension_source : str
        "given", "generator" or "estimated".
    summary : dict
        Counts of the last run (total, skipped, ran, failed); empty when loaded from a store.
    """

    rows: object = field(repr=False)
    spec: dict = field(repr=False)
    dimension: float
    smoothness: float
    ambient_dim: int
    name: str
    store_path: str
    noise_variance: float | None = None
    noise_estimate: float | None = None
    dimension_source: str = "given"
    noise_estimate_interval: tuple | None = None
    dimension_interval: tuple | None = None
    summary: dict = field(default_factory=dict)
    evidence: object = field(default=None, repr=False)
    _skip_in_dict = ("rows", "evidence")

    def __post_init__(self):
        from manireg.curves.evidence import add_cell_columns

        if self.rows is not None and len(self.rows) and "width_capped" not in self.rows:
            nv = self.noise_variance if self.noise_variance is not None else self.noise_estimate
            self.rows = add_cell_columns(self.rows, nv)

    def evidence_summary(self, metric="test_mse") -> dict:
        """Learner -> :class:`~manireg.curves.evidence.LearnerEvidence`: the evidence cells (budget and capacity
        checks, stored under their own labels in :attr:`evidence`) read against each net's main curve, with the
        sizes where the width rule hit ``width_max`` and training MSE over the noise variance."""
        from manireg.curves.evidence import summarise_evidence

        nv = self.noise_variance if self.noise_variance is not None else self.noise_estimate
        return summarise_evidence(self.rows, self.evidence, metric=metric, noise_variance=nv)

    def to_frame(self):
        """The rows (a copy)."""
        return self.rows.copy()

    @property
    def learners(self) -> list:
        return sorted(self.rows["learner"].astype(str).unique()) if len(self.rows) else []

    def fit_settings(self, **kwargs) -> dict:
        """Keyword arguments of :func:`~manireg.curves.fitting.fit_exponent` for this campaign: ``dimension``,
        ``smoothness`` and ``ambient_dim`` default to the campaign's, and ``floor`` (default ``DEFAULT_FLOOR``, ``"fit"``) is
        turned into fit arguments by :func:`~manireg.curves.floors.choose_floor` with the campaign's noise
        estimate and its interval."""
        kwargs.setdefault("smoothness", self.smoothness)
        kwargs.setdefault("dimension", self.dimension)
        kwargs.setdefault("ambient_dim", self.ambient_dim)
        floor, nv, _ = choose_floor(kwargs.get("floor", DEFAULT_FLOOR), kwargs.get("metric", "test_mse"), self.noise_level)
        kwargs["floor"] = floor
        if kwargs.get("noise_variance") is None:
            kwargs["noise_variance"] = nv
        return kwargs

    @property
    def noise_level(self):
        """The noise estimate with its interval (:class:`~manireg.curves.noise.NoiseLevel`), or None."""
        from manireg.curves.noise import NoiseLevel

        if self.noise_estimate is None:
            return None
        iv = None if self.noise_estimate_interval is None else tuple(float(v) for v in self.noise_estimate_interval)
        return NoiseLevel(float(self.noise_estimate), iv, "gamma")

    def read_out(self, *, floor=DEFAULT_FLOOR, target_error=None, smoothness=None, allow_unverified=False, seed=0,
                 metric="test_mse", level=0.95):
        """Everything the CLI, the report and the curve panel show (:func:`manireg.curves.readout.read_out`):
        fits with verdicts, each learner against its own reference rate, extrapolation checks and a plan.

        ``smoothness`` (a number or a ``(low, high)`` range) defaults to the campaign's.
        """
        from manireg.curves.readout import read_out

        kinds = {}
        for l in self.spec.get("learners") or []:
            if isinstance(l, dict) and l.get("name"):
                kinds[l["name"]] = l.get("kind")
        return read_out(self.rows, dimension=self.dimension, dimension_interval=self.dimension_interval,
                        smoothness=self.smoothness if smoothness is None else smoothness, ambient_dim=self.ambient_dim,
                        noise_estimate=self.noise_level, floor=floor, target_error=target_error,
                        learner_kinds=kinds or None, seed=seed, metric=metric, level=level,
                        allow_unverified=allow_unverified, evidence=self.evidence_summary(metric),
                        noise_variance=self.noise_variance)

    def fit(self, learner=None, **kwargs):
        """Fitted exponent of one learner (:func:`manireg.curves.fitting.fit_exponent`).

        ``smoothness``, ``dimension`` and ``ambient_dim`` default to the campaign's; ``floor`` takes the
        choices of :func:`~manireg.curves.floors.choose_floor` (default ``DEFAULT_FLOOR``, ``"fit"``: a floor fitted
        within the interval of the campaign's noise estimate).
        With several learners and ``learner=None`` this returns :meth:`fit_all`.

        References
        ----------
        .. [1] J. Hestness et al., arXiv:1712.00409 (2017).
        """
        from manireg.curves.fitting import fit_exponent

        if learner is None and len(self.learners) > 1:
            return self.fit_all(**kwargs)
        return fit_exponent(self.rows, learner, **self.fit_settings(**kwargs))

    def fit_all(self, **kwargs):
        """Exponents of every learner (:func:`manireg.curves.fitting.fit_all`)."""
        from manireg.curves.fitting import fit_all

        return fit_all(self.rows, **self.fit_settings(**kwargs))

    def plan(self, target_error, learner=None, *, fit=None, allow_unverified=False, **fit_kwargs):
        """Samples needed for ``target_error`` (:func:`manireg.curves.planning.plan_samples`).

        Parameters
        ----------
        target_error : float
        learner : str, optional
            Which learner's curve; may be omitted with one learner.
        fit : ExponentFit, optional
            Reuse a fit; otherwise :meth:`fit` is called with ``fit_kwargs``.
        allow_unverified : bool, default=False
            Passed on: plan from a fit whose verdict is not "measured".

        References
        ----------
        .. [1] I. Alabdulmohsin, B. Neyshabur, X. Zhai, NeurIPS 2022.
        """
        from manireg.curves.fitting import fit_exponent
        from manireg.curves.planning import plan_samples

        if fit is None:
            fit = fit_exponent(self.rows, learner, **self.fit_settings(**fit_kwargs))
        return plan_samples(fit, target_error, allow_unverified=allow_unverified, dimension=self.dimension,
                            smoothness=self.smoothness, ambient_dim=self.ambient_dim)


def _pair(v):
    return None if v is None else (float(v[0]), float(v[1]))


class Campaign:
    """A learning-curve campaign bound to a result store.

    Parameters
    ----------
    spec : CampaignSpec, optional
        The definition; or pass its fields as keyword arguments (``X=..., y=..., sizes=...``).
    store : str or os.PathLike or ResultStore, optional
        Where rows are kept. None: a fresh file in a new temporary folder (kept until the OS cleans it;
        pass a path to resume later). Opened at once, so an unwritable path fails before any work.
    **kwargs
        Fields of :class:`CampaignSpec` when ``spec`` is None.

    Raises
    ------
    ValueError
        For an invalid spec (see :func:`manireg.curves.sweep.prepare`) or an unwritable store
        (:class:`manireg.curves.store.StoreError`), before anything runs.

    References
    ----------
    .. [1] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).
    """

    def __init__(self, spec=None, *, store=None, **kwargs):
        if spec is None:
            spec = CampaignSpec(**kwargs)
        elif kwargs:
            raise ValueError(f"Campaign: pass a CampaignSpec or keyword fields, not both; got spec and {sorted(kwargs)}.")
        if not isinstance(spec, CampaignSpec):
            raise ValueError(f"Campaign: spec must be a CampaignSpec; got {type(spec).__name__}.")
        self.spec = spec
        self.data = prepare(spec)  # before the store: bad settings never leave a file behind
        self._cells = expand(self.data)  # so are the learners' settings on this data (an image shape, ...)
        if store is None:
            store = os.path.join(tempfile.mkdtemp(prefix="manireg-campaign-"), "campaign.sqlite")
        self.store = store if isinstance(store, ResultStore) else ResultStore(store)

    @classmethod
    def from_regression_sample(cls, sample, *, store=None, **kwargs):
        """A campaign on a synthetic :class:`manireg.data.RegressionSample`, keeping its noise-free target.

        d and s default to the sample's true dimension and smoothness; the rows then carry
        ``test_mse_clean`` and :meth:`CampaignResult.fit` knows the noise variance.
        """
        kwargs.setdefault("dimension", float(sample.dimension))
        kwargs.setdefault("smoothness", float(sample.smoothness))
        campaign = cls(CampaignSpec(X=sample.X, y=sample.y, f_clean=sample.f_clean, **kwargs), store=store)
        campaign.data.noise_variance = float(sample.noise_variance)
        return campaign

    def cells(self) -> list:
        """All cells of the campaign (see :func:`manireg.curves.sweep.expand`)."""
        if self._cells is None:
            self._cells = expand(self.data)
        return list(self._cells)

    def progress(self) -> dict:
        """``{"total", "finished", "remaining"}`` cells of this campaign (finished: stored with status ok)."""
        keys = {c.key for c in self.cells()}
        done = len(keys & self.store.finished_keys(include_failed=False, campaign=self.data.name))
        return {"total": len(keys), "finished": done, "remaining": len(keys) - done}

    def run(self, executor="inprocess", n_jobs=None, scheduler=None, retry_failed=False, progress=True,
            torch_threads=1, stop=None, on_unit=None, metadata=None, evidence=False) -> CampaignResult:
        """Run the missing cells and return every row of this campaign's cells.

        See :func:`manireg.curves.execution.run_cells` for the arguments (``stop`` pauses between units,
        ``on_unit`` is called after each stored unit). ``metadata`` (a dict, e.g. the geometry read-out) is
        stored with the campaign's own metadata, so a report rebuilt from the store has it. Interrupting (Ctrl-C)
        keeps what finished; calling ``run`` again resumes.

        ``evidence=True`` (or an :class:`~manireg.curves.evidence.EvidenceSettings`) then runs the missing
        evidence cells of the net learners (:meth:`run_evidence`): the budget check and the capacity check,
        stored under their own learner labels; :attr:`CampaignResult.evidence` holds their rows and the
        read-out gates the verdicts with them.
        """
        cells = self.cells()
        noise = self.noise_level()
        self.store.put_campaign({**self.data.metadata(self.spec), "noise_estimate": noise.value,
                                 "noise_estimate_interval": noise.interval, **(metadata or {})})
        summary = run_cells(cells, self.data, self.store, executor=executor, n_jobs=n_jobs, scheduler=scheduler,
                            progress=progress, retry_failed=retry_failed, torch_threads=torch_threads,
                            stop=stop, on_unit=on_unit)
        if evidence is not False and evidence is not None and not (stop is not None and stop.is_set()):
            settings = evidence if not isinstance(evidence, bool) else None
            extra = self.run_evidence(settings, executor=executor, n_jobs=n_jobs, scheduler=scheduler,
                                      progress=progress, retry_failed=retry_failed, torch_threads=torch_threads,
                                      stop=stop, on_unit=on_unit)
            summary = dict(summary, evidence=dict(extra))
        return self.result(summary)

    def add_learners(self, learners) -> list:
        """Add learners (same data, splits, seed and store) and return the ones added.

        A learner equal to one the campaign has (same kind and resolved parameters) is skipped
        (:func:`manireg.curves.capacity.new_learners`), so no cell is trained twice; existing learners and their
        cell keys are unchanged, and :meth:`run` then trains only the new learners' cells.
        """
        from manireg.curves.capacity import new_learners

        added = new_learners(self.data, learners)
        if added:
            self.data.learners = list(self.data.learners) + added
            self.spec = dataclasses.replace(self.spec, learners=list(self.data.learners))
            self._cells = None  # the cell list is rebuilt on next use; old cells keep their keys
        return added

    def evidence_cells(self, settings=None) -> list:
        """The evidence cells that the rows stored so far call for (:func:`manireg.curves.evidence.evidence_cells`):
        the budget check (2x and 4x the steps) of the flagged cells and of a cell at each end of the curve, the
        capacity check (2x width) at the largest sizes. Keyed like every cell, so nothing is trained twice."""
        from manireg.curves.evidence import evidence_cells

        rows = self.store.rows(self.data.name, keys=[c.key for c in self.cells()])
        return evidence_cells(self.cells(), rows, self.data, settings)

    def run_evidence(self, settings=None, **run_kwargs) -> dict:
        """Run the missing evidence cells (:meth:`evidence_cells`); ``run_kwargs`` as for :meth:`run`. Only cells
        not yet in the store are trained. Returns the run summary."""
        cells = self.evidence_cells(settings)
        if not cells:
            return {"total": 0, "skipped": 0, "ran": 0, "failed": 0}
        return run_cells(cells, self.data, self.store, **run_kwargs)

    def noise_estimate(self) -> float:
        """Label-noise variance estimated from the rows outside the test set (the Gamma test; see
        :func:`manireg.curves.noise.noise_variance`). Cached; :meth:`noise_level` adds its interval."""
        return self.noise_level().value

    def noise_level(self):
        """The noise estimate with its interval (:class:`~manireg.curves.noise.NoiseLevel`). Cached."""
        if getattr(self, "_noise", None) is None:
            import warnings

            from manireg.curves.noise import noise_variance

            pool = np.setdiff1d(np.arange(len(self.data.y)), self.data.test_idx)
            if self.data.on_disk and len(pool) > 50_000:  # data on disk: a seeded subsample of the pool
                pool = np.sort(np.random.default_rng(self.data.seed).choice(pool, 50_000, replace=False))
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")  # duplicates are reported by the geometry read-out
                self._noise = noise_variance(self.data.take(pool), self.data.y[pool], seed=self.data.seed).level()
        return self._noise

    def result(self, summary=None) -> CampaignResult:
        """The rows stored so far for this campaign's cells (no training)."""
        from manireg.curves.evidence import evidence_rows

        keys = [c.key for c in self.cells()]
        rows = self.store.rows(self.data.name, keys=keys)
        _, extra = evidence_rows(self.store.rows(self.data.name))
        if len(extra):
            extra = extra[extra["checked_key"].isin(set(keys))].reset_index(drop=True)
        return CampaignResult(rows=rows, evidence=extra, spec=self.spec.to_dict(), dimension=self.data.dimension,
                              smoothness=self.data.smoothness, ambient_dim=self.data.ambient_dim,
                              name=self.data.name, store_path=self.store.path,
                              noise_variance=self.data.noise_variance, noise_estimate=self.noise_estimate(),
                              noise_estimate_interval=self.noise_level().interval,
                              dimension_source=self.data.dimension_source,
                              dimension_interval=_pair(self.spec.dimension_interval),
                              summary=dict(summary or {}))

    @staticmethod
    def from_store(path, campaign=None) -> CampaignResult:
        """Reload a campaign's rows and metadata from a store without training.

        Parameters
        ----------
        path : str or os.PathLike
        campaign : str, optional
            Label; may be omitted when the store holds one campaign.

        Returns
        -------
        CampaignResult
            Rows of that campaign computed on the data recorded in its metadata (matching fingerprint).
        """
        path = os.fspath(path)
        if not os.path.exists(path):
            raise FileNotFoundError(f"Campaign.from_store: no store at {path!r}; pass the path a campaign was run with.")
        store = ResultStore(path)
        labels = store.campaigns()
        if campaign is None:
            if len(labels) != 1:
                raise ValueError(f"Campaign.from_store: the store holds campaigns {labels}; pass campaign=... to pick one.")
            campaign = labels[0]
        if campaign not in labels:
            raise ValueError(f"Campaign.from_store: the store holds no campaign {campaign!r}; it holds {labels}.")
        meta = store.campaign_meta(campaign)
        rows = store.rows(campaign)
        fp = meta.get("fingerprint")
        if fp is not None and len(rows):
            same = rows["config_json"].map(lambda s: json.loads(s).get("data") == fp if s else False)
            rows = rows[same.to_numpy(dtype=bool)].reset_index(drop=True)
        from manireg.curves.evidence import evidence_rows

        rows, extra = evidence_rows(rows)
        return CampaignResult(rows=rows, evidence=extra, spec=meta.get("spec") or {}, dimension=meta.get("dimension"),
                              smoothness=meta.get("smoothness"), ambient_dim=meta.get("ambient_dim"),
                              name=campaign, store_path=path, noise_variance=meta.get("noise_variance"),
                              noise_estimate=meta.get("noise_estimate"),
                              noise_estimate_interval=_pair(meta.get("noise_estimate_interval")),
                              dimension_source=meta.get("dimension_source", "given"),
                              dimension_interval=_pair((meta.get("spec") or {}).get("dimension_interval")))

    def __repr__(self):
        return (f"Campaign(name={self.data.name!r}, sizes={self.data.sizes}, repeats={self.data.repeats}, "
                f"learners={[l.name for l in self.data.learners]}, store={self.store.path!r})")
