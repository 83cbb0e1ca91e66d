"""The package namespace: every advertised name resolves, and a campaign worker's imports stay light."""

import subprocess
import sys

import pytest

import manireg


@pytest.mark.parametrize("package", ["manireg", "manireg.curves", "manireg.nets"])
def test_every_exported_name_resolves(package):
    import importlib

    mod = importlib.import_module(package)
    for name in mod.__all__:
        assert getattr(mod, name) is not None, name
    assert set(mod.__all__) <= set(dir(mod))
    with pytest.raises(AttributeError, match="has no attribute 'no_such_name'"):
        getattr(mod, "no_such_name")


def test_top_level_names_are_the_defining_objects():
    from manireg.curves.campaign import Campaign
    from manireg.nets.regressor import NetworkRegressor

    assert manireg.Campaign is Campaign and manireg.NetworkRegressor is NetworkRegressor
    assert manireg.plots.__name__ == "manireg.plots"


def test_worker_imports_do_not_load_sklearn_scipy_pandas_or_matplotlib():
    # A campaign worker process imports the executor, the learners and the trainer; each heavy library it
    # does not need costs start-up time on the critical path of a campaign (see docs/campaigns.md).
    code = ("import sys, manireg.curves.execution, manireg.curves.learners, manireg.nets.training; "
            "print(sorted(m for m in ('sklearn', 'scipy', 'pandas', 'matplotlib') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"
