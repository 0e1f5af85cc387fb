"""Installable anywhere (issue 12): the wheel carries the SQL, the criteria tables and the
sample data, and an installed copy finds them (the full install-and-run check is in .ci/run)."""

from __future__ import annotations

import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    out = tmp_path_factory.mktemp("wheel")
    proc = subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation", "-q",
                           "-w", str(out), str(ROOT)], capture_output=True, text=True, timeout=300)
    if proc.returncode != 0 and "setuptools" in proc.stderr:
        proc = subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(out), str(ROOT)],
                              capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    return next(out.glob("*.whl"))


def test_wheel_holds_sql_criteria_and_samples(wheel):
    """Every file of sql/ and data_samples/ in the checkout is in the wheel (reference: zipfile)."""
    names = set(zipfile.ZipFile(wheel).namelist())
    for src, dst in (("sql", "pipeline/_sql"), ("data_samples", "pipeline/_samples")):
        for f in (ROOT / src).rglob("*"):
            if f.is_file() and "__pycache__" not in f.parts:
                assert f"{dst}/{f.relative_to(ROOT / src).as_posix()}" in names, f


def test_installed_layout_is_found(wheel, tmp_path):
    """Unpacked as an installer would, outside the checkout, pipeline.core.resources finds the
    bundled folders inside the package."""
    zipfile.ZipFile(wheel).extractall(tmp_path / "site")
    code = ("import pipeline.core.resources as r, pathlib; "
            "print(r.sql_dir()); print(r.sample_paths()['dem'].is_file())")
    proc = subprocess.run([sys.executable, "-I", "-c", f"import sys; sys.path.insert(0, {str(tmp_path / 'site')!r}); "
                           + code], capture_output=True, text=True, cwd=tmp_path, timeout=60)
    assert proc.returncode == 0, proc.stderr
    sql, dem = proc.stdout.split()
    assert Path(sql) == tmp_path / "site" / "pipeline" / "_sql" and dem == "True"
