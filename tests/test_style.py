"""The manireg style module: distinct learner and estimator entries, colour-blind-safe groups, badges, numbers."""

import ast
import inspect
import itertools
import math

import numpy as np
import pytest

from manireg import style

# ------------------------------------------------------------------------------------ colour science
# sRGB -> CIE XYZ (D65) -> CIELAB, CIE 15:2004 (CIE 1976 L*a*b*); the sRGB transfer curve and matrix are
# those of IEC 61966-2-1. Colour difference: CIE76, the Euclidean distance in L*a*b*.
_SRGB_TO_XYZ = np.array([[0.4124564, 0.3575761, 0.1804375],
                         [0.2126729, 0.7151522, 0.0721750],
                         [0.0193339, 0.1191920, 0.9503041]])
_D65 = np.array([0.95047, 1.0, 1.08883])

# Colour-vision deficiency simulation matrices for severity 1.0, applied to linear RGB: Machado, Oliveira and
# Fernandes, "A physiologically-based model for simulation of color vision deficiency", IEEE TVCG 15(6),
# 2009 (values from memory).
_PROTANOPIA = np.array([[0.152286, 1.052583, -0.204868],
                        [0.114503, 0.786281, 0.099216],
                        [-0.003882, -0.048116, 1.051998]])
_DEUTERANOPIA = np.array([[0.367322, 0.860646, -0.227968],
                          [0.280085, 0.672501, 0.047413],
                          [-0.011820, 0.042940, 0.968881]])
_VISIONS = {"normal": np.eye(3), "deuteranopia": _DEUTERANOPIA, "protanopia": _PROTANOPIA}

#: Smallest CIE76 difference allowed within a group (about 2.3 is "just noticeable"; 20 is a clear
#: difference between plot colours; common practice for categorical palettes is 15-25).
MIN_DELTA_E = 20.0


def _linear_rgb(hex_colour):
    c = np.array([int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5)])
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def _lab(linear):
    t = (_SRGB_TO_XYZ @ np.clip(linear, 0, 1)) / _D65
    delta = 6 / 29
    f = np.where(t > delta ** 3, np.cbrt(t), t / (3 * delta ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def _min_delta_e(colours, vision):
    labs = [_lab(_VISIONS[vision] @ _linear_rgb(c)) for c in colours]
    return min(float(np.linalg.norm(a - b)) for a, b in itertools.combinations(labs, 2))


def test_lab_conversion_matches_known_values():
    # CIELAB of sRGB white is (100, 0, 0) and of pure sRGB red about (53.24, 80.09, 67.20) (from memory).
    assert np.allclose(_lab(_linear_rgb("#ffffff")), [100, 0, 0], atol=0.05)
    assert np.allclose(_lab(_linear_rgb("#ff0000")), [53.24, 80.09, 67.20], atol=0.1)
    # the simulation maps grey to grey (rows of each matrix sum to 1)
    grey = _linear_rgb("#808080")
    for m in (_PROTANOPIA, _DEUTERANOPIA):
        assert np.allclose(m @ grey, grey, atol=2e-3)


_GROUPS = {
    "learners": [v["color"] for v in style.LEARNER_STYLES.values()],
    "estimators": [v["color"] for v in style.ESTIMATOR_STYLES.values()],
    "verdicts": [v["color"] for v in style.VERDICT_BADGES.values()] + [style.NEUTRAL_BADGE["color"]],
}


@pytest.mark.parametrize("vision", sorted(_VISIONS))
@pytest.mark.parametrize("group", sorted(_GROUPS))
def test_group_colours_stay_apart_under_colour_vision_deficiency(group, vision):
    assert _min_delta_e(_GROUPS[group], vision) >= MIN_DELTA_E


def test_every_learner_kind_and_estimator_has_a_distinct_entry():
    from manireg.curves.learners import LearnerSpec  # noqa: F401  (registers the learner kinds)
    from manireg.curves import learners

    kinds = {cls.kind for cls in vars(learners).values() if inspect.isclass(cls) and getattr(cls, "kind", "")}
    assert {"net", "knn", "kernel_ridge"} <= kinds
    assert kinds <= set(style.LEARNER_STYLES), f"learner kinds without a fixed style: {kinds - set(style.LEARNER_STYLES)}"
    estimators = {"mle", "twonn", "lpca", "corr", "consensus"}
    assert estimators <= set(style.ESTIMATOR_STYLES)
    entries = [(s["color"], s["marker"]) for s in style.LEARNER_STYLES.values()]
    entries += [(s["color"], s["marker"]) for s in style.ESTIMATOR_STYLES.values()]
    assert len(set(entries)) == len(entries)
    # within a group also the markers alone differ, so no pair relies on colour
    for table in (style.LEARNER_STYLES, style.ESTIMATOR_STYLES):
        markers = [s["marker"] for s in table.values()]
        assert len(set(markers)) == len(markers)


def test_estimator_names_of_the_report_are_styled():
    from manireg.geometry.dimension.consensus import _ESTIMATOR_NAMES

    assert set(_ESTIMATOR_NAMES) == {"mle", "twonn", "lpca", "corr"}  # the names the estimators write into reports
    for name in _ESTIMATOR_NAMES:
        assert style.estimator_style(name)["label"] != name


def test_learner_style_does_not_depend_on_drawing_order():
    names = ["knn", "net", "net-w0.5", "net-w2", "kernel_ridge", "my_forest", "policy"]
    first = {n: style.learner_style(n) for n in names}
    second = {n: style.learner_style(n) for n in reversed(names)}
    assert first == second
    assert style.learner_style("net-w2")["marker"] == style.learner_style("net")["marker"]
    shades = {style.learner_style(n)["color"] for n in ("net", "net-w0.5", "net-w2", "net-w4")}
    assert len(shades) == 4
    assert style.learner_style("my_forest") in [dict(r, label="my_forest", name="my_forest") for r in style.RESERVE_STYLES]


def _verdicts_in_fitting():
    """Every VERDICT_* constant of the fitting module, read from its source."""
    from manireg.curves import fitting

    tree = ast.parse(inspect.getsource(fitting))
    found = {}
    for node in ast.walk(tree):
        if isinstance(node, ast.Assign) and len(node.targets) == 1 and isinstance(node.targets[0], ast.Name):
            name = node.targets[0].id
            if name.startswith("VERDICT_") and isinstance(node.value, ast.Constant):
                found[name] = node.value.value
    return found


def test_every_verdict_of_the_fitting_module_has_its_own_badge():
    verdicts = _verdicts_in_fitting()
    assert len(verdicts) >= 3
    for value in verdicts.values():
        assert value in style.VERDICT_BADGES
    shapes = [b["shape"] for b in style.VERDICT_BADGES.values()] + [style.NEUTRAL_BADGE["shape"]]
    assert len(set(shapes)) == len(shapes)


def test_unknown_verdict_gets_the_neutral_badge():
    b = style.verdict_badge("something new")
    assert b["shape"] == style.NEUTRAL_BADGE["shape"] and b["label"] == "something new"
    assert style.verdict_badge(None)["label"] == "no verdict"
    assert "<svg" in style.badge_html("something new") and "something new" in style.badge_html("something new")


def test_error_colour_is_our_own():
    # well-known design systems' reds and status colours (Bootstrap, Material, Tailwind, GitHub, Ant,
    # Carbon; from memory)
    known = {"#dc3545", "#d32f2f", "#f44336", "#dc2626", "#ef4444", "#cf222e", "#ff4d4f", "#da1e28", "#28a745",
             "#198754", "#ffc107", "#0d6efd", "#007bff", "#17a2b8"}
    ours = {style.ERROR, style.WARNING} | set(style.STATUS.values())
    ours |= {v for b in style.BUTTONS.values() for v in b.values()}
    assert not ours & known


@pytest.mark.parametrize("value, digits, expected", [
    (0.010000000000000002, 3, "0.01"),
    (0.5234, 3, "0.523"),
    (0.5234, 2, "0.52"),
    (1234.5678, 3, "1235"),
    (2.0, 3, "2"),
    (3, 3, "3"),
    (np.int64(1400), 3, "1400"),
    (np.float64(0.125), 2, "0.12"),
    (1e-7, 3, "1e-7"),
    (2.5e8, 3, "2.5e8"),
    (0.0, 3, "0"),
    (-0.000123456, 3, "-0.000123"),
    (None, 3, "none"),
    (float("nan"), 3, "not available"),
    (float("inf"), 3, "infinite"),
    (-math.inf, 3, "minus infinite"),
    (True, 3, "yes"),
    ("text", 3, "text"),
])
def test_fmt_number(value, digits, expected):
    assert style.fmt_number(value, digits) == expected


def test_fmt_interval_and_value():
    assert style.fmt_interval(0.4712, 0.5689) == "[0.471, 0.569]"
    assert style.fmt_interval(None, 1.0) == "not available"
    assert style.fmt_interval(float("nan"), 1.0) == "not available"
    assert style.fmt_value([80, 160, 320]) == "80, 160, 320"
    assert style.fmt_value(None) == "none"
    assert style.fmt_value("None") == "none"


def test_plain_labels_cover_the_names_on_screen():
    expected = {"test_mse": "test error (MSE)", "test_mse_clean": "error against the noise-free target",
                "interval_kind": "interval", "n_lo": "smallest n", "step_cap": "step limit", "c_depth": "depth constant",
                "width_max": "largest width"}
    for code, words in expected.items():
        assert style.plain_label(code) == words
    assert style.plain_label("some_new_column") == "some new column"
    assert all("_" not in v for v in style.PLAIN_LABELS.values())


def test_exponent_and_predicted_texts():
    class Fit:
        exponent, interval, verdict = 0.5213, (0.4671, 0.5702), "measured"

    assert style.exponent_text(Fit()) == "exponent 0.52 [0.47, 0.57], measured"
    assert style.predicted_text((0.6, 0.6)) == "predicted exponent 0.60"
    assert style.predicted_text((0.55, 0.65)) == "predicted exponent 0.55 to 0.65"


def test_reference_lines_are_fixed_and_rc_is_valid():
    import matplotlib

    assert style.reference_line("predicted", "#123456")["color"] == "#123456"
    assert style.reference_line("ambient", "#123456")["color"] == style.REFERENCE_LINES["ambient"]["color"]
    with pytest.raises(ValueError, match="kind must be one of"):
        style.reference_line("nope")
    with matplotlib.rc_context(style.rc()):
        pass


def test_style_module_imports_nothing_heavy():
    import subprocess
    import sys

    code = "import sys, manireg.style; print(any(m in sys.modules for m in ('matplotlib', 'numpy', 'pandas', 'torch')))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
