"""The entry point of a learning-curve study: define, run (or resume), reload, fit and plan.

>>> import manireg.curves.study as st                                          # doctest: +SKIP
>>> study = st.Study(X=X, y=y, sizes=[256, 512, 1024, 2048], repeats=5,
...                  learners=["net", "knn"], store="results/study.sqlite")       # doctest: +SKIP
>>> result = study.run(executor="processes", n_jobs=2)                          # doctest: +SKIP
>>> result.fit("net")                                                           # doctest: +SKIP

Running again with the same settings and store finishes only what is missing; a changed setting makes new
cells (new keys) and never reuses rows computed under the old one.

References
----------
.. [1] M. Chen, H. Jiang, W. Liao, T. Zhao, Information and Inference 11 (2022).
.. [2] J. Hestness et al., arXiv:1712.00409 (2017).
"""

from __future__ import annotations

import json
import os
import tempfile

import numpy as np
from dataclasses import dataclass, field

from manireg._results import ResultMixin
from manireg.curves.execution import run_cells
from manireg.curves.store import ResultStore
from manireg.curves.sweep import StudySpec, expand, prepare

__all__ = ["Study", "StudyResult"]


@dataclass
class StudyResult(ResultMixin):
    """Rows of a finished (or partly finished) study with what is needed to read them.

    Attributes
    ----------
    rows : pandas.DataFrame
        One row per cell (columns :data:`manireg.curves.sweep.ROW_COLUMNS`).
    spec : dict
        The study settings (:meth:`StudySpec.to_dict`).
    d, s : float
        Intrinsic dimension and smoothness the study used.
    D : int
        Ambient dimension.
    label : str
        Study name in the store.
    store_path : str
        Where the rows live.
    noise_variance : float or None
        Known label-noise variance (synthetic data), else None.
    noise_estimate : float or None
        Label-noise variance estimated from the data outside the test set
        (:func:`manireg.curves.noise.noise_variance`, first-neighbour estimator); the floor of
        ``floor="estimate"`` fits when no variance is known.
    d_source : str
        "given", "generator" or "estimated".
    summary : dict
        Counts of the last run (total, skipped, ran, failed); empty when loaded from a store.
    """

    rows: object = field(repr=False)
    spec: dict = field(repr=False)
    d: float
    s: float
    D: int
    label: str
    store_path: str
    noise_variance: float | None = None
    noise_estimate: float | None = None
    d_source: str = "given"
    summary: dict = field(default_factory=dict)
    _skip_in_dict = ("rows",)

    def to_frame(self):
        """The rows (a copy)."""
        return self.rows.copy()

    @property
    def learners(self) -> list:
        return sorted(self.rows["learner"].astype(str).unique()) if len(self.rows) else []

    def _fit_kwargs(self, kwargs):
        kwargs.setdefault("smoothness", self.s)
        kwargs.setdefault("dimension", self.d)
        kwargs.setdefault("ambient_dim", self.D)
        if kwargs.get("floor") == "estimate" and kwargs.get("noise_variance") is None:
            known = self.noise_variance if self.noise_variance is not None else self.noise_estimate
            if known is not None:
                kwargs["noise_variance"] = known
        return kwargs

    def fit(self, learner=None, **kwargs):
        """Fitted exponent of one learner (:func:`manireg.curves.fitting.fit_exponent`).

        ``smoothness``, ``dimension`` and ``ambient_dim`` default to the study's s, d and D; with
        ``floor="estimate"`` the known noise variance of synthetic data is used when none is given, else
        the study's noise estimate.
        With several learners and ``learner=None`` this returns :meth:`fit_all`.

        References
        ----------
        .. [1] J. Hestness et al., arXiv:1712.00409 (2017).
        """
        from manireg.curves.fitting import fit_exponent

        if learner is None and len(self.learners) > 1:
            return self.fit_all(**kwargs)
        return fit_exponent(self.rows, learner, **self._fit_kwargs(kwargs))

    def fit_all(self, **kwargs):
        """Exponents of every learner (:func:`manireg.curves.fitting.fit_all`)."""
        from manireg.curves.fitting import fit_all

        return fit_all(self.rows, **self._fit_kwargs(kwargs))

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
            fit = fit_exponent(self.rows, learner, **self._fit_kwargs(dict(fit_kwargs)))
        return plan_samples(fit, target_error, allow_unverified=allow_unverified, dimension=self.d,
                            smoothness=self.s, input_dim=self.D)


class Study:
    """A learning-curve study bound to a result store.

    Parameters
    ----------
    spec : StudySpec, optional
        The definition; or pass its fields as keyword arguments (``X=..., y=..., sizes=...``).
    store : str or os.PathLike or ResultStore, optional
        Where rows are kept. None: a fresh file in a new temporary folder (kept until the OS cleans it;
        pass a path to resume later). Opened at once, so an unwritable path fails before any work.
    **kwargs
        Fields of :class:`StudySpec` when ``spec`` is None.

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
            spec = StudySpec(**kwargs)
        elif kwargs:
            raise ValueError(f"Study: pass a StudySpec or keyword fields, not both; got spec and {sorted(kwargs)}.")
        if not isinstance(spec, StudySpec):
            raise ValueError(f"Study: spec must be a StudySpec; got {type(spec).__name__}.")
        self.spec = spec
        if store is None:
            store = os.path.join(tempfile.mkdtemp(prefix="manireg-study-"), "study.sqlite")
        self.store = store if isinstance(store, ResultStore) else ResultStore(store)
        self.data = prepare(spec)
        self._cells = None

    @classmethod
    def from_regression_sample(cls, sample, *, store=None, **kwargs):
        """A study on a synthetic :class:`manireg.data.RegressionSample`, keeping its noise-free target.

        d and s default to the sample's true dimension and smoothness; the rows then carry
        ``test_mse_clean`` and :meth:`StudyResult.fit` knows the noise variance.
        """
        kwargs.setdefault("d", float(sample.dimension))
        kwargs.setdefault("s", float(sample.smoothness))
        study = cls(StudySpec(X=sample.X, y=sample.y, f_clean=sample.f_clean, **kwargs), store=store)
        study.data.noise_variance = float(sample.noise_variance)
        return study

    def cells(self) -> list:
        """All cells of the study (see :func:`manireg.curves.sweep.expand`)."""
        if self._cells is None:
            self._cells = expand(self.data)
        return list(self._cells)

    def run(self, executor="inprocess", n_jobs=None, scheduler=None, retry_failed=False, progress=True,
            torch_threads=1, stop=None, on_unit=None, metadata=None) -> StudyResult:
        """Run the missing cells and return every row of this study's cells.

        See :func:`manireg.curves.execution.run_cells` for the arguments (``stop`` pauses between units,
        ``on_unit`` is called after each stored unit). ``metadata`` (a dict, e.g. the geometry read-out) is
        stored with the study's own metadata, so a report rebuilt from the store has it. Interrupting (Ctrl-C)
        keeps what finished; calling ``run`` again resumes.
        """
        cells = self.cells()
        self.store.put_study({**self.data.metadata(self.spec), "noise_estimate": self.noise_estimate(), **(metadata or {})})
        summary = run_cells(cells, self.data, self.store, executor=executor, n_jobs=n_jobs, scheduler=scheduler,
                            progress=progress, retry_failed=retry_failed, torch_threads=torch_threads,
                            stop=stop, on_unit=on_unit)
        return self.result(summary)

    def noise_estimate(self) -> float:
        """Label-noise variance estimated from the rows outside the test set (first-neighbour estimator of
        Devroye, Györfi, Lugosi and Walk 2018; see :func:`manireg.curves.noise.noise_variance`). Cached."""
        if getattr(self, "_noise", None) is None:
            import warnings

            from manireg.curves.noise import noise_variance

            pool = np.setdiff1d(np.arange(len(self.data.y)), self.data.test_idx)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")  # duplicates are reported by the geometry read-out
                self._noise = float(noise_variance(self.data.X[pool], self.data.y[pool]).value)
        return self._noise

    def result(self, summary=None) -> StudyResult:
        """The rows stored so far for this study's cells (no training)."""
        rows = self.store.rows(self.data.label, keys=[c.key for c in self.cells()])
        return StudyResult(rows=rows, spec=self.spec.to_dict(), d=self.data.d, s=self.data.s, D=self.data.D,
                           label=self.data.label, store_path=self.store.path,
                           noise_variance=self.data.noise_variance, noise_estimate=self.noise_estimate(),
                           d_source=self.data.d_source,
                           summary=dict(summary or {}))

    @staticmethod
    def from_store(path, study=None) -> StudyResult:
        """Reload a study's rows and metadata from a store without training.

        Parameters
        ----------
        path : str or os.PathLike
        study : str, optional
            Label; may be omitted when the store holds one study.

        Returns
        -------
        StudyResult
            Rows of that study computed on the data recorded in its metadata (matching fingerprint).
        """
        path = os.fspath(path)
        if not os.path.exists(path):
            raise FileNotFoundError(f"Study.from_store: no store at {path!r}; pass the path a study was run with.")
        store = ResultStore(path)
        labels = store.studies()
        if study is None:
            if len(labels) != 1:
                raise ValueError(f"Study.from_store: the store holds studies {labels}; pass study=... to pick one.")
            study = labels[0]
        if study not in labels:
            raise ValueError(f"Study.from_store: the store holds no study {study!r}; it holds {labels}.")
        meta = store.study_meta(study)
        rows = store.rows(study)
        fp = meta.get("fingerprint")
        if fp is not None and len(rows):
            same = rows["config_json"].map(lambda s: json.loads(s).get("data") == fp if s else False)
            rows = rows[same.to_numpy(dtype=bool)].reset_index(drop=True)
        return StudyResult(rows=rows, spec=meta.get("spec") or {}, d=meta.get("d"), s=meta.get("s"), D=meta.get("D"),
                           label=study, store_path=path, noise_variance=meta.get("noise_variance"),
                           noise_estimate=meta.get("noise_estimate"),
                           d_source=meta.get("d_source", "given"))

    def __repr__(self):
        return (f"Study(label={self.data.label!r}, sizes={self.data.sizes}, repeats={self.data.repeats}, "
                f"learners={[l.name for l in self.data.learners]}, store={self.store.path!r})")
