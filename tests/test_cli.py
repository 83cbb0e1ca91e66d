"""The command line: each command end to end on small settings."""

import json
import subprocess
import sys

from manireg.cli import main


def test_demo_quick_writes_summary(tmp_path):
    rc = main(["demo", "--quick", "--out", str(tmp_path)])
    assert rc == 0
    summary = json.loads((tmp_path / "summary.json").read_text())
    assert summary["true_dimension"] == 2 and summary["ambient_dim"] == 1024


def test_no_command_prints_help(capsys):
    assert main([]) == 2
    assert "usage" in capsys.readouterr().out


def test_unwritable_out_folder(tmp_path, capsys):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    rc = main(["demo", "--quick", "--out", str(blocker / "sub")])
    assert rc == 2
    err = capsys.readouterr().err
    assert "cannot create output folder" in err and "Traceback" not in err


def test_help_via_subprocess():
    r = subprocess.run([sys.executable, "-m", "manireg", "--help"], capture_output=True, text=True)
    assert r.returncode == 0 and "demo" in r.stdout
