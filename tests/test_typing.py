"""physics/ is type checked (mypy, configured in pyproject.toml) against its recorded baseline."""
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def test_no_file_gains_type_errors():
    # catches a change that adds type errors to physics/ (a wrong return type, a None passed on)
    proc = subprocess.run([sys.executable, str(ROOT / ".ci" / "mypy_baseline.py")], cwd=ROOT,
                          capture_output=True, text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert "mypy:" in proc.stdout
