"""Execute every worked notebook top to bottom with a kernel of this interpreter and check for errors."""

import json
import sys
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")
pytest.importorskip("ipykernel")

NOTEBOOKS = sorted((Path(__file__).resolve().parent.parent / "notebooks").glob("*.ipynb"))


def write_kernelspec(root: Path, name: str = "python3") -> Path:
    """A kernelspec directory whose ``python3`` kernel is ``sys.executable -m ipykernel_launcher``.

    Put first on JUPYTER_PATH, it wins over any other ``python3`` spec on the machine, so notebooks run
    with this interpreter and its installed packages (also in a fresh virtual environment, where no
    kernel was ever installed with ``ipykernel install``).
    """
    spec_dir = root / "kernels" / name
    spec_dir.mkdir(parents=True, exist_ok=True)
    spec = {"argv": [sys.executable, "-m", "ipykernel_launcher", "-f", "{connection_file}"],
            "display_name": f"Python 3 ({Path(sys.executable).parent.parent.name})", "language": "python",
            "metadata": {"debugger": False}}
    (spec_dir / "kernel.json").write_text(json.dumps(spec))
    return root


@pytest.fixture
def this_python_kernel(tmp_path, monkeypatch):
    root = write_kernelspec(tmp_path / "jupyter")
    monkeypatch.setenv("JUPYTER_PATH", str(root))
    monkeypatch.setenv("MPLBACKEND", "module://matplotlib_inline.backend_inline")
    monkeypatch.setenv("OMP_NUM_THREADS", "1")
    from jupyter_client.kernelspec import KernelSpecManager

    spec = KernelSpecManager().get_kernel_spec("python3")
    assert spec.argv[0] == sys.executable
    return tmp_path


def test_notebooks_are_committed_without_outputs():
    assert len(NOTEBOOKS) == 5  # geometry, sizing and planning, learning-curve campaign, policy campaign,
    # classification on rendered images
    for path in NOTEBOOKS:
        nb = nbformat.read(path, as_version=4)
        for cell in nb.cells:
            if cell.cell_type == "code":
                assert cell.outputs == [] and cell.execution_count is None, f"{path.name} holds outputs"


@pytest.mark.slow
@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.stem for p in NOTEBOOKS])
def test_notebook_executes(path, this_python_kernel):
    nb = nbformat.read(path, as_version=4)
    client = nbclient.NotebookClient(nb, kernel_name="python3", timeout=600, startup_timeout=120,
                                     resources={"metadata": {"path": str(this_python_kernel)}})
    client.execute()  # raises CellExecutionError with the traceback on the first failing cell
    errors = [o for c in nb.cells if c.cell_type == "code" for o in c.outputs if o.get("output_type") == "error"]
    assert errors == []
