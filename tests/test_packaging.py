"""The wheel carries the language profiles, the demo study and the console script."""

from __future__ import annotations

import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.slow
def test_wheel_contains_profiles_demo_and_entry_point(tmp_path: Path) -> None:
    result = subprocess.run(
        [sys.executable, "-m", "pip", "wheel", str(ROOT), "--no-deps", "--no-build-isolation", "-q", "-w", str(tmp_path)],
        capture_output=True,
        text=True,
    )
    assert result.returncode == 0, result.stderr[-2000:]
    (wheel,) = tmp_path.glob("termloom-*.whl")
    with zipfile.ZipFile(wheel) as archive:
        names = set(archive.namelist())
        entry_points = next(n for n in names if n.endswith("entry_points.txt"))
        scripts = archive.read(entry_points).decode()
    profiles = {p.name for p in (ROOT / "lang_profiles").iterdir() if (p / "profile.toml").is_file()}
    assert profiles, "no language profiles in the checkout"
    for code in profiles:
        assert f"workbench/lang_profiles/{code}/profile.toml" in names
    assert "workbench/lang_profiles/README.md" in names
    demo_studies = sorted(p.name for p in (ROOT / "demo_texts").glob("*.study.toml"))
    for name in demo_studies:
        assert f"workbench/demo_texts/{name}" in names
    assert "termloom = workbench.cli:main" in scripts
    assert not any(n.startswith("tests/") for n in names)
    modules = {str(p.relative_to(ROOT)) for p in (ROOT / "workbench").rglob("*.py")}
    missing = sorted(m for m in modules if m not in names)
    assert not missing, f"modules missing from the wheel (add their package to pyproject.toml): {missing}"

    # The installed layout (namespace data packages) must find its profiles
    # and demo study without the checkout beside it.
    site = tmp_path / "site"
    with zipfile.ZipFile(wheel) as archive:
        archive.extractall(site)
    probe = (
        "from workbench.core.profiles import profiles_root, load_profile\n"
        "root = profiles_root()\n"
        "assert 'site' in str(root) and root.is_dir(), root\n"
        "print(load_profile('de').name)\n"
    )
    env = {"PYTHONPATH": str(site), "PATH": ""}
    result = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, cwd=tmp_path, env=env)
    assert result.returncode == 0, result.stderr[-2000:]
    assert result.stdout.strip() == "German"
