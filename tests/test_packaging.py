"""Shipped priors: found by name from the source tree (fast), and from a built wheel
installed into a fresh virtual environment outside the source tree (slow)."""
import os
import pathlib
import subprocess
import sys

import numpy
import pytest

from ventsource.cli.main import main
from ventsource.inference.priors import load_prior_file
from ventsource.inference.priors.shipped import resolve_prior, shipped_prior_names

ROOT = pathlib.Path(__file__).resolve().parents[1]


def test_shipped_prior_resolves_by_name():
    names = shipped_prior_names()
    assert names == sorted(p.stem for p in (ROOT / "priors").glob("*.toml"))
    path = resolve_prior("arc_basalt")
    assert pathlib.Path(path).read_bytes() == (ROOT / "priors" / "arc_basalt.toml").read_bytes()
    assert load_prior_file(path).name == "arc_basalt"
    assert resolve_prior("arc_basalt.toml") == path
    assert resolve_prior("no_such_prior") == "no_such_prior"   # left for the reader to report
    assert resolve_prior("../priors/arc_basalt") == "../priors/arc_basalt"


def test_priors_command_lists_every_shipped_prior(capsys):
    assert main(["priors"]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    assert [ln.split()[0] for ln in lines] == shipped_prior_names()
    assert all(len(ln.split(None, 1)) == 2 for ln in lines)   # name and a description


def test_unknown_prior_name_is_one_line(tmp_path, capsys):
    code = main(["forward", "--prior", "no_such_prior", "--set", "pressure_bar=100"])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "no_such_prior: file not found" in err


def _clean_env():
    # no PYTHONPATH: the source tree (and the egg-info a build leaves in src/) must not be seen
    return {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}


def _venv_with_wheel(tmp_path):
    env = _clean_env()
    wheel_dir = tmp_path / "wheel"
    subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(wheel_dir), str(ROOT)],
                   check=True, capture_output=True, cwd=tmp_path, env=env)
    wheel = next(wheel_dir.glob("ventsource-*.whl"))
    venv = tmp_path / "venv"
    subprocess.run([sys.executable, "-m", "venv", str(venv)], check=True, env=env)
    py = venv / "bin" / "python"
    # the dependencies come from this interpreter's site-packages (no downloads); a plain
    # path line, so an editable install of ventsource there (a .pth of its own) is not used
    site = subprocess.run([str(py), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
                          check=True, capture_output=True, text=True, env=env).stdout.strip()
    subprocess.run([str(py), "-m", "pip", "install", "--no-deps", "-q", str(wheel)], check=True,
                   capture_output=True, env=env)
    # after the install: pip would otherwise take the ventsource found there as installed
    deps = pathlib.Path(numpy.__file__).resolve().parents[1]
    pathlib.Path(site, "deps_from_test.pth").write_text(str(deps) + "\n")
    return venv, py


@pytest.mark.slow
def test_wheel_in_fresh_venv_runs_priors_and_demo(tmp_path):
    venv, py = _venv_with_wheel(tmp_path)
    work = tmp_path / "elsewhere"
    work.mkdir()
    env = _clean_env()
    where = subprocess.run([str(py), "-c", "import ventsource; print(ventsource.__file__)"], cwd=work,
                           env=env, check=True, capture_output=True, text=True).stdout
    assert str(venv) in where and str(ROOT) not in where
    exe = str(venv / "bin" / "ventsource")
    listed = subprocess.run([exe, "priors"], cwd=work, env=env, capture_output=True, text=True)
    assert listed.returncode == 0, listed.stderr
    assert "arc_basalt" in listed.stdout and "demo_mount_kerrow_fast" in listed.stdout
    fwd = subprocess.run([exe, "forward", "--prior", "arc_basalt", "--json", "--set", "pressure_bar=200",
                          "temperature_c=1100", "dfmq=1", "scrubbed_so2=0", "h2o_wt=3", "co2_ppm=2000",
                          "s_ppm=1500", "quench_temperature_c=900",
                          "h2_retained_log10=0"], cwd=work, env=env, capture_output=True, text=True)
    assert fwd.returncode == 0, fwd.stderr
    assert str(venv) in fwd.stdout   # the prior came from the installed package
    demo = subprocess.run([exe, "demo", "--out", "d", "--rows", "2", "--workers", "1"], cwd=work, env=env,
                          capture_output=True, text=True, timeout=1800)
    assert demo.returncode == 0, demo.stderr[-2000:]
    assert (work / "d" / "summary.csv").is_file() and (work / "d" / "hazard.json").is_file()
    assert "Traceback" not in demo.stderr


@pytest.mark.slow
def test_editable_install_finds_shipped_priors(tmp_path):
    env = _clean_env()
    venv = tmp_path / "venv"
    subprocess.run([sys.executable, "-m", "venv", str(venv)], check=True, env=env)
    py = venv / "bin" / "python"
    subprocess.run([str(py), "-m", "pip", "install", "--no-deps", "-q", "-e", str(ROOT)], check=True,
                   capture_output=True, env=env, cwd=tmp_path)
    site = subprocess.run([str(py), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
                          check=True, capture_output=True, text=True, env=env).stdout.strip()
    pathlib.Path(site, "deps_from_test.pth").write_text(str(pathlib.Path(numpy.__file__).resolve().parents[1]) + "\n")
    code = ("import importlib.resources; from ventsource.inference.priors.shipped import resolve_prior;"
            "print(importlib.resources.files('ventsource.shipped_priors')); print(resolve_prior('arc_basalt'))")
    out = subprocess.run([str(py), "-c", code], cwd=tmp_path, env=env, capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    folder, path = out.stdout.split()[-2:]
    # the editable install maps the data package onto the repository's own priors/ folder
    assert pathlib.Path(folder) == ROOT / "priors"
    assert pathlib.Path(path) == ROOT / "priors" / "arc_basalt.toml"
    listed = subprocess.run([str(venv / "bin" / "ventsource"), "priors"], cwd=tmp_path, env=env,
                            capture_output=True, text=True)
    assert listed.returncode == 0 and "arc_basalt" in listed.stdout, listed.stderr


def test_python_api_takes_a_shipped_name_too():
    assert load_prior_file("rhyolite_silicic").path == resolve_prior("rhyolite_silicic")


def test_package_version_is_the_project_version():
    """The version a run records (and --resume compares) is the one the wheel carries."""
    import tomllib

    import ventsource
    with open(ROOT / "pyproject.toml", "rb") as fh:
        assert ventsource.__version__ == tomllib.load(fh)["project"]["version"]
