"""The distribution: one import name, package data, numerics free of the study layer.

A wheel is built from the checkout (no network: --no-build-isolation with the
test extra's setuptools), installed with --no-deps into a fresh virtual
environment whose dependencies come from this one, and asked to solve one
point from a folder outside the checkout.  This is what a regular (not
editable) install does on a user's machine.
"""

import json
import os
import site
import subprocess
import sys
import sysconfig
import zipfile
from pathlib import Path

import pytest
from precision import ITERATION

REPO = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    dist = tmp_path_factory.mktemp("dist")
    subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "-q", "--no-deps", "--no-build-isolation", "-w", str(dist), str(REPO)],
        check=True,
        capture_output=True,
        text=True,
    )
    return next(dist.glob("knudsweep-*.whl"))


def test_wheel_has_one_import_name_and_its_data(wheel):
    with zipfile.ZipFile(wheel) as z:
        names = z.namelist()
    tops = {n.split("/")[0] for n in names if not n.split("/")[0].endswith((".dist-info", ".data"))}
    assert tops == {"knudsweep"}
    for data in ("knudsweep/data/gases.yaml", "knudsweep/data/schema.yaml"):
        assert data in names
    assert "knudsweep/solver/plane_channel/kernels.py" in names
    # the demo study and the execution profiles are not package data
    assert not any(n.startswith("knudsweep/data/profiles") or n == "knudsweep/data/config.yaml" for n in names)


def test_installed_wheel_solves_a_point_outside_the_checkout(wheel, tmp_path):
    env_dir = tmp_path / "venv"
    subprocess.run([sys.executable, "-m", "venv", "--without-pip", str(env_dir)], check=True)
    py = env_dir / "bin" / "python"
    target = subprocess.run(
        [str(py), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
        check=True,
        capture_output=True,
        text=True,
    ).stdout.strip()
    subprocess.run(
        [sys.executable, "-m", "pip", "install", "-q", "--no-deps", "--target", target, str(wheel)],
        check=True,
        capture_output=True,
        text=True,
    )
    # dependencies from this environment; its .pth files (the editable install of
    # this checkout) are not processed from a path listed in a .pth file
    deps = [p for p in {*site.getsitepackages(), sysconfig.get_paths()["purelib"]} if Path(p).is_dir()]
    (Path(target) / "_deps_from_test_env.pth").write_text("\n".join(deps) + "\n")
    work = tmp_path / "elsewhere"
    work.mkdir()
    env = {k: v for k, v in os.environ.items() if not k.startswith(("PYTHON", "KNUDSWEEP_"))}
    env["NUMBA_CACHE_DIR"] = str(tmp_path / "numba_cache")
    out = subprocess.run(
        [
            str(py),
            "-c",
            "import sys, knudsweep; assert knudsweep.__file__.startswith(sys.argv[1]), knudsweep.__file__;"
            "from knudsweep.cli import main; sys.exit(main(['solve', '--delta', '1.0', '--json']))",
            target,
        ],
        cwd=work,
        env=env,
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert out.returncode == 0, out.stderr
    record = json.loads(out.stdout)
    # G_P(delta = 1), plane channel, BGK, diffuse walls: the value the checkout gives (the CLI accelerates, the
    # Python default iterates plainly: the same fixed point, measured 3e-10 apart)
    from knudsweep.solver.plane_channel import solve_plane_channel

    assert record["coefficients"]["G_P"] == pytest.approx(
        solve_plane_channel("poiseuille", delta=1.0).coefficient("G_P"), rel=ITERATION
    )


def test_numerics_never_import_the_study_layer():
    code = (
        "import importlib, pkgutil, sys, knudsweep.solver as s\n"
        "for m in pkgutil.walk_packages(s.__path__, 'knudsweep.solver.'):\n"
        "    importlib.import_module(m.name)\n"
        "print('\\n'.join(n for n in sys.modules if n.startswith('knudsweep.')"
        " and not n.startswith(('knudsweep.solver', 'knudsweep.data'))))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""
