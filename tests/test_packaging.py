"""What an install needs: the package list, the data files inside a built wheel, the lock file,
and WeasyPrint importing without a warning (its system libraries present)."""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
import tomllib
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PYPROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
LOCK = ROOT / "requirements" / "lock.txt"


def _name(requirement: str) -> str:
    """The normalised distribution name of a PEP 508 requirement (PEP 503 normalisation)."""
    name = re.match(r"[A-Za-z0-9._-]+", requirement).group(0)
    return re.sub(r"[-_.]+", "-", name).lower()


def _locked() -> dict[str, str]:
    pins = {}
    for line in LOCK.read_text(encoding="utf-8").splitlines():
        match = re.match(r"^([A-Za-z0-9._-]+)==(\S+)", line)
        if match:
            pins[_name(match.group(1))] = match.group(2)
    return pins


def test_every_package_folder_is_listed():
    on_disk = {".".join(p.parent.relative_to(ROOT).parts) for p in (ROOT / "service").rglob("__init__.py")}
    listed = set(PYPROJECT["tool"]["setuptools"]["packages"])
    assert on_disk - listed == set(), "package folders missing from [tool.setuptools] packages"
    assert listed - on_disk == {"service.bundled.rules", "service.bundled.templates"}


def test_the_lock_pins_every_declared_dependency_exactly():
    project = PYPROJECT["project"]
    declared = project["dependencies"] + [r for extra in project["optional-dependencies"].values() for r in extra]
    pins = _locked()
    assert {_name(r) for r in declared} - set(pins) == set()
    # The build backend is pinned too, so `pip install --no-build-isolation -e .` is reproducible.
    assert {"setuptools", "wheel"} <= set(pins)
    # pyparsing is imported directly (service.chem.formula), so it is declared, not left to periodictable.
    assert "pyparsing" in {_name(r) for r in project["dependencies"]}


def test_weasyprint_imports_without_a_warning():
    # WeasyPrint warns at import when a system library it wants (e.g. HarfBuzz-subset) is missing;
    # requirements/system.sh installs them. The suite turns warnings into errors, so check it first.
    result = subprocess.run([sys.executable, "-W", "error", "-c", "import weasyprint"], capture_output=True, text=True)
    assert result.returncode == 0, result.stderr[-2000:]


@pytest.mark.slow
def test_a_built_wheel_carries_rules_and_templates(tmp_path):
    # Build from a copy of the files git knows (tracked or new, not ignored), so the checkout gains no build/ or egg-info folder.
    tracked = subprocess.run(["git", "ls-files", "--cached", "--others", "--exclude-standard"], cwd=ROOT, capture_output=True, text=True, check=True).stdout.split()
    if not tracked:  # pragma: no cover - not a git checkout
        pytest.skip("not a git checkout")
    source = tmp_path / "src"
    for name in tracked:
        if (ROOT / name).is_file():
            (source / name).parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(ROOT / name, source / name)
    subprocess.run([sys.executable, "-m", "pip", "wheel", "--quiet", "--no-deps", "--no-build-isolation",
                    "-w", str(tmp_path / "dist"), str(source)], check=True, capture_output=True)
    wheel = next((tmp_path / "dist").glob("dotledger-*.whl"))
    names = set(zipfile.ZipFile(wheel).namelist())
    for folder in ("rules", "templates"):
        expected = {f"service/bundled/{n}" for n in tracked if n.startswith(f"{folder}/")}
        assert expected and expected <= names, sorted(expected - names)
    assert "service/store/migrations/versions/0001_inventory.py" in names
    assert "service/web/static/dotledger.css" in names
