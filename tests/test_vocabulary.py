"""One name per concept: every command-line option is in the vocabulary table of docs/vocabulary.md, and the
command line uses no retired name."""

import argparse
import os
import re

import pytest

from manireg.cli import RENAMED, build_parser

DOC = os.path.join(os.path.dirname(__file__), "..", "docs", "vocabulary.md")


def _table():
    rows = []
    for line in open(DOC, encoding="utf-8"):
        if line.startswith("|") and not line.startswith("|---") and "concept" not in line.split("|")[1]:
            cells = [c.strip() for c in line.strip().strip("|").split("|")]
            rows.append(cells)
    return rows


def _cli_options():
    parser = build_parser()
    out = {}
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for name, sub in action.choices.items():
                for a in sub._actions:
                    for flag in a.option_strings:
                        if flag.startswith("--"):
                            out.setdefault(flag, set()).add(name)
                    if not a.option_strings:
                        out.setdefault(a.dest.upper(), set()).add(name)
        for flag in action.option_strings:
            if flag.startswith("--"):
                out.setdefault(flag, set()).add("manireg")
    return out


def test_every_cli_option_is_in_the_vocabulary():
    listed = set()
    for row in _table():
        listed |= set(re.findall(r"`(--[a-z-]+|[A-Z]+)`", row[2]))
    missing = {flag: sorted(where) for flag, where in _cli_options().items() if flag not in listed}
    assert not missing, f"options missing from docs/vocabulary.md: {missing}"


def test_no_retired_name_is_an_option():
    options = _cli_options()
    for old in RENAMED:
        assert old not in options, old
    commands = {a for act in build_parser()._actions if isinstance(act, argparse._SubParsersAction) for a in act.choices}
    assert commands == {"demo", "geometry", "curves", "policy", "size", "plan", "report", "track"}


def test_vocabulary_rows_name_one_concept_each():
    rows = _table()
    concepts = [r[0] for r in rows]
    assert len(concepts) == len(set(concepts))
    flags = [f for r in rows for f in re.findall(r"`(--[a-z-]+)`", r[2])]
    assert len(flags) == len(set(flags)), "an option listed for two concepts"


def test_cli_doc_lists_every_option():
    text = open(os.path.join(os.path.dirname(DOC), "cli.md"), encoding="utf-8").read()
    missing = [flag for flag in _cli_options() if flag.startswith("--") and flag not in ("--help", "--version")
               and f"`{flag}" not in text]
    assert not missing, f"docs/cli.md does not describe {missing}"


def _screen_labels():
    labels = set()
    for line in open(DOC, encoding="utf-8"):
        if line.startswith("|") and not line.startswith("|---"):
            cells = [c.strip() for c in line.strip().strip("|").split("|")]
            if cells[0] != "concept" and cells:
                labels |= {part.strip() for part in cells[-1].split(",") if part.strip()}
    return labels


def _panel_labels():
    import ipywidgets as w
    import numpy as np
    import pandas as pd

    from manireg.curves.learners import LearnerSpec
    from manireg.curves.policy import PolicyCampaign
    from manireg.widgets import CurvePanel, GeometryPanel, PolicyPanel, SizingPanel

    def walk(x, out):
        d = getattr(x, "description", None)
        if isinstance(d, str) and d.strip():
            out.add(d.strip())
        for c in getattr(x, "children", ()) or ():
            walk(c, out)
        return out

    rng = np.random.default_rng(0)
    rows = pd.DataFrame([{"learner": "net", "n": n, "repeat": r, "status": "ok",
                          "test_mse": n ** -0.5 * (1 + 0.05 * rng.standard_normal())}
                         for n in (50, 100, 200, 400) for r in range(3)])
    X = rng.normal(size=(300, 3))
    X[:, 2] = X[:, 0] ** 2
    # a policy campaign that is never run: its panel's controls are built all the same
    policy = PolicyCampaign(generator={"manifold": "sphere", "n": 600, "d": 2, "ambient_dim": 4, "n_actions": 2,
                                       "seed": 0}, sizes=[120, 240], repeats=1, test_size=200,
                            learners=[LearnerSpec("policy", params={"method": "dr", "max_steps": 5})])
    labels = set()
    for panel in (SizingPanel(), CurvePanel(rows, n_boot=20), GeometryPanel(X, auto=False), PolicyPanel(policy)):
        walk(panel, labels)
    return labels


def test_every_panel_label_is_in_the_vocabulary():
    missing = sorted(_panel_labels() - _screen_labels())
    assert not missing, f"panel labels missing from docs/vocabulary.md: {missing}"
