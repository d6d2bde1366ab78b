"""The built wheel is a complete, working install: build it, install it into a fresh venv, run it.

One module-scoped fixture copies the checkout (tracked and untracked files, no build
debris) to a temporary folder, builds the wheel there with ``python -m build --wheel
--no-isolation`` (offline: setuptools and build come from the test extra, pinned by
constraints.txt), and installs it with ``pip install --no-deps --force-reinstall`` into a
fresh venv.  Installing every dependency again would take a minute and 660 MB, so the venv
borrows them from the environment running the tests: a ``.pth`` file, written after the
install, appends this environment's site-packages to the venv's path (``venv
--system-site-packages`` would not do: inside a venv it gives the *base* interpreter's
packages), and ``JUPYTER_PATH`` names this environment's ``share/jupyter`` (Voila's
templates, the kernel spec, the widget's lab extension).  A path line in a ``.pth`` does not
run the ``.pth`` files it names, so the checkout's editable-install hook stays off and
mixchart comes from the wheel alone (checked through ``mixchart.__file__``).  Every command
runs with the venv first on PATH, its working directory outside the checkout and no
PYTHONPATH, so nothing can be found in the checkout by accident.
"""

from __future__ import annotations

import email.parser
import os
import re
import shutil
import site
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

from serving import free_port, serve_fetch_and_stop  # tests/serving.py

pytestmark = pytest.mark.slow

REPO = Path(__file__).resolve().parents[1]
EXAMPLES = sorted(p.name for p in (REPO / "mixchart" / "examples").glob("*.json"))
#: build debris and local state that a fresh clone does not have
IGNORED = shutil.ignore_patterns(".git", "build", "dist", "*.egg-info", "__pycache__", ".hypothesis",
                                 ".pytest_cache", ".benchmarks", "artifacts", "*.pyc")


def _clean_env(venv: Path | None = None) -> dict[str, str]:
    # PYTHONDONTWRITEBYTECODE would make setuptools print "byte-compiling is disabled" warnings.
    drop = {"PYTHONPATH", "PYTHONHOME", "VIRTUAL_ENV", "PYTHONDONTWRITEBYTECODE", "JUPYTER_PATH"}
    env = {k: v for k, v in os.environ.items() if k not in drop}
    env["PIP_DISABLE_PIP_VERSION_CHECK"] = "1"
    env["PIP_NO_INDEX"] = "1"  # the install must not need the network (--no-deps; nothing to fetch)
    if venv is not None:
        env["VIRTUAL_ENV"] = str(venv)
        env["PATH"] = f"{venv / 'bin'}{os.pathsep}{env.get('PATH', '')}"
        env["JUPYTER_PATH"] = str(Path(sys.prefix) / "share" / "jupyter")
    return env


def _run(cmd: list[str], cwd: Path, venv: Path | None = None, timeout: float = 300) -> subprocess.CompletedProcess:
    return subprocess.run(cmd, cwd=cwd, env=_clean_env(venv), capture_output=True, text=True, timeout=timeout,
                          check=False)


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    """(wheel path, build output, venv folder, a scratch folder outside the checkout)."""
    pytest.importorskip("build")
    root = tmp_path_factory.mktemp("wheel")
    src = root / "src"
    shutil.copytree(REPO, src, symlinks=True, ignore=IGNORED)
    done = _run([sys.executable, "-m", "build", "--wheel", "--no-isolation", "--outdir", str(root / "dist"), str(src)],
                cwd=root)
    output = done.stdout + done.stderr
    assert done.returncode == 0, output
    wheels = list((root / "dist").glob("mixchart-*.whl"))
    assert len(wheels) == 1, wheels
    venv = root / "venv"
    done = _run([sys.executable, "-m", "venv", str(venv)], cwd=root)
    assert done.returncode == 0, done.stderr
    python = venv / "bin" / "python"
    done = _run([str(python), "-m", "pip", "install", "-q", "--no-deps", "--force-reinstall", str(wheels[0])],
                cwd=root, venv=venv)
    assert done.returncode == 0, done.stdout + done.stderr
    done = _run([str(python), "-c", "import sysconfig; print(sysconfig.get_path('purelib'))"], cwd=root, venv=venv)
    ours = [p for p in site.getsitepackages() if Path(p).is_dir()]  # this environment's site-packages
    (Path(done.stdout.strip()) / "_mixchart_test_parent_env.pth").write_text("\n".join(ours) + "\n", encoding="utf-8")
    work = root / "work"
    work.mkdir()
    return wheels[0], output, venv, work


def test_build_prints_no_warning(built):
    _, output, _, _ = built
    # setuptools reports packaging problems (a data-only folder that is not a package, a
    # deprecated license table, a missing file) as "warning"/"Warning" lines.
    warnings = [line for line in output.splitlines() if re.search(r"warn", line, re.IGNORECASE)]
    assert warnings == [], "\n".join(warnings)


def test_wheel_holds_the_package_its_examples_and_the_license(built):
    wheel, _, _, _ = built
    import mixchart

    with zipfile.ZipFile(wheel) as zf:
        names = set(zf.namelist())
        dist_info = f"mixchart-{mixchart.__version__}.dist-info"
        metadata = email.parser.Parser().parsestr(zf.read(f"{dist_info}/METADATA").decode("utf-8"))
        license_text = zf.read(f"{dist_info}/licenses/LICENSE").decode("utf-8")
    assert wheel.name.startswith(f"mixchart-{mixchart.__version__}-py3-none-any")
    assert {f"mixchart/examples/{name}" for name in EXAMPLES} <= names and len(EXAMPLES) == 5
    chains = sorted(p.name for p in (REPO / "mixchart" / "examples" / "chains").glob("*.json"))
    assert {f"mixchart/examples/chains/{name}" for name in chains} <= names and len(chains) == 3
    # every subpackage is in the wheel (a missing one imports from a checkout only)
    for package in ("analysis", "chains", "elements", "filters", "models", "physics"):
        assert f"mixchart/{package}/__init__.py" in names
    assert {"mixchart/__init__.py", "mixchart/cli.py", "mixchart/serve.py"} <= names
    assert not any(n.startswith(("tests/", "benchmarks/", "notebooks/", "tools/")) for n in names)
    assert metadata["Version"] == mixchart.__version__  # written once, in mixchart/__init__.py
    assert metadata["License-Expression"] == "MIT"
    assert metadata.get_all("License-File") == ["LICENSE"]
    assert "MIT License" in license_text and "the mixchart developers" in license_text


def test_installed_copy_shadows_the_checkout(built):
    _, _, venv, work = built
    code = "import mixchart, numpy, sys; print(mixchart.__file__); print(numpy.__file__); print(sys.prefix)"
    done = _run([str(venv / "bin" / "python"), "-c", code], cwd=work, venv=venv)
    assert done.returncode == 0, done.stderr
    where, numpy_where, prefix = done.stdout.split()
    assert Path(prefix) == venv and Path(where).is_relative_to(venv), where
    assert not Path(where).is_relative_to(REPO), where
    assert not Path(numpy_where).is_relative_to(venv)  # the dependencies are borrowed, not installed


@pytest.mark.parametrize("example", ["fm_receiver", "uplink_transmitter", "scanner_double_conversion"])
def test_installed_sweep_runs_a_built_in_example(built, example):
    _, _, venv, work = built
    done = _run([str(venv / "bin" / "mixchart"), "sweep", "--example", example], cwd=work, venv=venv)
    assert done.returncode == 0, done.stderr
    lines = done.stdout.splitlines()
    assert lines[2].startswith(("PASS: worst margin", "FAIL: worst margin")), done.stdout
    assert any(line.startswith("kind ") for line in lines)


def test_installed_snapshot_writes_a_report(built):
    _, _, venv, work = built
    out = work / "report.html"
    done = _run([str(venv / "bin" / "mixchart"), "snapshot", "-o", str(out)], cwd=work, venv=venv)
    assert done.returncode == 0, done.stderr
    page = out.read_text(encoding="utf-8")
    assert page.lstrip().lower().startswith("<!doctype html") and "Broadcast FM tuner" in page


def test_installed_serve_answers_on_localhost_and_stops(built):
    pytest.importorskip("voila")
    _, _, venv, work = built
    port = free_port()
    _, page, status = serve_fetch_and_stop(
        [str(venv / "bin" / "mixchart"), "serve", "--port", str(port)], port, cwd=work, env=_clean_env(venv)
    )
    assert "voila" in page.lower()
    assert status == 0
