"""A wheel built from the checkout, installed into a fresh venv, runs `monitor init` and `monitor demo`.

This proves templates/, migrations/ and demo_programme/ reach an installed wheel, not only a checkout.
"""

from __future__ import annotations

import os
import subprocess
import sys
import venv

import pytest

from tests.conftest import REPO_ROOT


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    out = tmp_path_factory.mktemp("wheel")
    built = subprocess.run([sys.executable, "-m", "build", "--wheel", "--no-isolation", "--outdir", str(out),
                            str(REPO_ROOT)], capture_output=True, text=True)
    assert built.returncode == 0, built.stdout[-2000:] + built.stderr[-2000:]
    wheels = list(out.glob("monitor-*.whl"))
    assert len(wheels) == 1
    return wheels[0]


def test_wheel_carries_migrations_templates_and_demo(wheel):
    import zipfile

    names = zipfile.ZipFile(wheel).namelist()
    assert any(n.startswith("monitor/_bundled/migrations/versions/0001") for n in names)
    assert "monitor/_bundled/migrations/env.py" in names
    assert any(n.startswith("monitor/_bundled/templates/") for n in names)
    assert "monitor/_bundled/demo_programme/stations.csv" in names


def test_installed_wheel_runs_init_and_demo(wheel, tmp_path):
    env_dir = tmp_path / "venv"
    venv.EnvBuilder(with_pip=True).create(env_dir)
    py = env_dir / "bin" / "python"
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "MONITOR_DATABASE_URL")}
    subprocess.run([str(py), "-m", "pip", "install", "-q", str(wheel)], check=True, env=env, capture_output=True)
    monitor = env_dir / "bin" / "monitor"
    work = tmp_path / "elsewhere"  # not the checkout: nothing may be found by accident
    work.mkdir()
    init = subprocess.run([str(monitor), "--db", "x.sqlite", "init"], cwd=work, env=env, capture_output=True, text=True)
    assert init.returncode == 0, init.stderr
    assert "created a monitor database" in init.stderr
    demo = subprocess.run([str(monitor), "demo", "--dir", "demo"], cwd=work, env=env, capture_output=True, text=True)
    assert demo.returncode == 0, demo.stderr
    assert "Programme summary" in demo.stdout
