"""Network size sweeps inside a campaign: the learners of a grid of width multipliers and depth constants, how
they join a campaign without touching what it already trained, and the capacity read-out per depth setting.

A net learner's cells are keyed by its name and its resolved parameters (:mod:`manireg.curves.sweep`), so adding
learners to a campaign leaves the keys of its existing cells unchanged: running it again trains only the new
learners' cells. A requested learner whose kind and resolved parameters equal an existing learner's is that
learner (nothing is added), whatever its name.

>>> from manireg.curves.learners import LearnerSpec
>>> [l.name for l in size_grid_learners(LearnerSpec("net"), [0.5, 2], [1.0])]
['net', 'net-w0.5', 'net-w2', 'net-cd1', 'net-w0.5-cd1', 'net-w2-cd1']
"""

from __future__ import annotations

import json
import math
import numbers

from manireg.curves.learners import LEARNER_KINDS, LearnerSpec, make_learner

__all__ = ["NET_KINDS", "DEPTH_SUFFIX", "size_grid_learners", "add_learners", "depth_groups", "capacity_by_depth",
           "template_net"]

#: Learner kinds whose size the sizing rules set (a size grid varies their width multiplier and depth constant).
NET_KINDS = ("net", "net_classifier")
#: Name suffix of a net learner at another depth constant: ``"net-w2-cd1"`` is width x2 with ``c_depth = 1``.
DEPTH_SUFFIX = "-cd"


def _positive_list(values, name, owner):
    out = []
    for v in values or ():
        if isinstance(v, bool) or not isinstance(v, numbers.Real) or not (math.isfinite(v) and v > 0):
            raise ValueError(f"{owner}: every value of {name} must be a real > 0; got {v!r}. Pass e.g. [0.5, 2].")
        if float(v) not in out:
            out.append(float(v))
    return out


def template_net(learners):
    """The first net learner (kind in :data:`NET_KINDS`) of ``learners``, or None: the one a size grid copies its
    training settings and sizing constants from."""
    for spec in learners or ():
        spec = LearnerSpec.coerce(spec)
        if spec.kind in NET_KINDS:
            return spec
    return None


def size_grid_learners(template, width_multipliers=(), depth_constants=()) -> list:
    """Net learners for every pair of width multiplier and depth constant, copying ``template``'s settings.

    Parameters
    ----------
    template : LearnerSpec
        A net learner (kind ``"net"`` or ``"net_classifier"``); its training settings and sizing constants are
        kept, only ``width_multiplier`` and ``constants["c_depth"]`` change.
    width_multipliers : sequence of float
        Multiples of the rule's width; 1 (the rule's width, which the capacity read-out compares against) is
        always included.
    depth_constants : sequence of float
        Values of the depth constant ``c_depth`` (hidden layers ``= ceil(c_depth log n)``, within the
        template's depth bounds); the template's own value is always included.

    Returns
    -------
    list of LearnerSpec
        Named like the command line's width sweep (``"net"``, ``"net-w0.5"``, ``"net-w2"``), with
        ``"-cd<c>"`` appended for a depth constant other than the template's.
    """
    from manireg.theory.sizing import SizingConstants

    owner = "size_grid_learners"
    template = LearnerSpec.coerce(template)
    if template.kind not in NET_KINDS:
        raise ValueError(f"{owner}: the template must be a net learner (kind one of {list(NET_KINDS)}); got kind "
                         f"{template.kind!r}. Add a net to the campaign's learners.")
    mults = [1.0] + [m for m in _positive_list(width_multipliers, "width_multipliers", owner) if m != 1.0]
    constants = dict(template.params.get("constants") or {})
    base_depth = float(constants.get("c_depth", SizingConstants().c_depth))
    depths = [base_depth] + [c for c in _positive_list(depth_constants, "depth_constants", owner) if c != base_depth]
    kind = LEARNER_KINDS[template.kind]
    out = []
    for c in depths:
        for m in mults:
            params = {**template.params, "width_multiplier": m}
            if c != base_depth:
                params["constants"] = {**constants, "c_depth": c}
            name = kind.default_name(params) + ("" if c == base_depth else f"{DEPTH_SUFFIX}{c:g}")
            out.append(LearnerSpec(template.kind, name=name, params=params))
    return out


def _signature(spec, data) -> str:
    """Kind plus resolved parameters: equal signatures train equal cells (names aside)."""
    from manireg.curves.sweep import canonical_json

    return canonical_json({"kind": spec.kind, "params": make_learner(spec).resolve(data)})


def new_learners(data, learners) -> list:
    """The learners of ``learners`` that a campaign on ``data`` does not have yet (checked, as LearnerSpec).

    A learner equal to one the campaign has (same kind and resolved parameters) is skipped, so no cell is
    trained twice.

    Raises
    ------
    ValueError
        For a learner of another task than the campaign's, or a new learner whose name an existing learner
        with other settings already has.
    """
    owner = "add_learners"
    current = list(data.learners)
    known = {_signature(l, data) for l in current}
    names = {l.name for l in current}
    added = []
    for value in learners:
        spec = LearnerSpec.coerce(value)
        task = getattr(LEARNER_KINDS[spec.kind], "task", "regress")
        if task != data.task:
            raise ValueError(f"{owner}: learner {spec.name!r} does task {task!r}; the campaign does {data.task!r}.")
        sig = _signature(spec, data)
        if sig in known:
            continue
        if spec.name in names:
            raise ValueError(f"{owner}: the campaign already has a learner named {spec.name!r} with other settings; "
                             "give the new learner its own name.")
        known.add(sig)
        names.add(spec.name)
        added.append(spec)
    return added


def add_learners(campaign, learners) -> list:
    """Add learners to ``campaign`` in place (:meth:`manireg.curves.campaign.Campaign.add_learners`) and return
    the ones added; a stored result (rows only) is refused with the fix."""
    from manireg.curves.campaign import Campaign

    if not isinstance(campaign, Campaign):
        raise ValueError(f"add_learners: campaign must be a Campaign (rows loaded from a store cannot train); got "
                         f"{type(campaign).__name__}. Rebuild the Campaign with the same settings and store.")
    return campaign.add_learners(learners)


def _learner_settings(config_json):
    """A row's learner kind and resolved parameters without the width multiplier (the depth group key)."""
    try:
        learner = json.loads(config_json).get("learner") or {}
    except (TypeError, ValueError):
        return None
    params = dict(learner.get("params") or {})
    params.pop("width_multiplier", None)
    return json.dumps({"kind": learner.get("kind"), "params": params}, sort_keys=True)


def depth_groups(rows) -> list:
    """Net learners of ``rows`` grouped by everything but the width multiplier: ``[(label, [learner, ...])]``.

    Each group is one depth setting (or other setting) whose width multipliers the capacity read-out compares.
    Learners are taken from the rows' ``config_json`` (the cell configuration); rows without it form one group
    of the learners named like nets. The label is the depth constant (``"c_depth 0.5"``) when the groups differ
    by it, else the learner names.
    """
    ok = rows[rows["status"].astype(str) == "ok"] if "status" in rows.columns else rows
    if not len(ok):
        return []
    groups = {}
    if "config_json" in ok.columns:
        first = ok.drop_duplicates("learner")
        for learner, cfg in zip(first["learner"].astype(str), first["config_json"]):
            key = _learner_settings(cfg)
            if key is None:
                continue
            settings = json.loads(key)
            if settings["kind"] not in NET_KINDS:
                continue
            groups.setdefault(key, []).append(learner)
    else:
        nets = [l for l in dict.fromkeys(ok["learner"].astype(str)) if l.split("-")[0] in NET_KINDS]
        if nets:
            groups["nets"] = nets
    out = []
    depths = {}
    for key, learners in groups.items():
        c = None
        if key != "nets":
            c = ((json.loads(key)["params"].get("constants") or {}).get("c_depth"))
        depths[key] = c
    by_depth = len({depths[k] for k in groups}) == len(groups)
    for key, learners in groups.items():
        label = f"c_depth {depths[key]:g}" if by_depth and depths[key] is not None else ", ".join(learners)
        out.append((label, learners))
    return out


def _multiplier_of_name(name):
    """The width multiplier a net's default name says: 1 for the bare kind, m for ``<kind>-w<m>``, else None."""
    import re

    if name in NET_KINDS:
        return 1.0
    m = re.fullmatch(r"(?:%s)-w(\d+(?:\.\d+)?)" % "|".join(NET_KINDS), name)
    return float(m.group(1)) if m else None


def capacity_by_depth(rows, *, metric="test_mse", level=0.95, swept_only=False) -> list:
    """The capacity read-out (:func:`manireg.curves.planning.capacity_readout`: paired over shared repeats) of
    each depth group of :func:`depth_groups`: ``[(label, CapacityReadout or str)]``, a string saying why a
    group has none (no rule's width, a single width, or the read-out's own message). ``swept_only``: only the
    groups with two or more nets (a width sweep)."""
    from manireg.curves.planning import capacity_readout

    out = []
    for label, learners in depth_groups(rows):
        if swept_only and len(learners) < 2:
            continue
        sub = rows[rows["learner"].astype(str).isin(learners)].copy()
        if "width_multiplier" not in sub.columns:  # rows without it: from the names ("net" is the rule's width)
            sub["width_multiplier"] = [_multiplier_of_name(v) for v in sub["learner"].astype(str)]
        try:
            out.append((label, capacity_readout(sub, metric=metric, level=level)))
        except ValueError as exc:
            out.append((label, f"no capacity read-out: {exc}"))
    return out
