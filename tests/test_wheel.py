"""A normal (non-editable) install works: the wheel holds every package file and no tests,
and, installed into a fresh virtual environment, `lagwise demo --screenshot` and the README's
"From Python" example run from a folder that holds a models.py and a desktop.py of its own.

The fresh environment gets no pip and no copies of the dependencies: the wheel is installed
with --no-deps by this environment's pip, and a .pth file makes this environment's
site-packages visible to it. A .pth path entry does not run the hook of an editable install,
so `lagwise` can only come from the installed wheel; the tests check that it does.
"""

from __future__ import annotations

import fnmatch
import json
import os
import re
import shutil
import struct
import subprocess
import sys
import sysconfig
import tomllib
import zipfile
from pathlib import Path, PurePosixPath

import pytest

ROOT = Path(__file__).resolve().parents[1]
PYPROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
SETUPTOOLS = PYPROJECT["tool"]["setuptools"]
PACKAGE_DIR: dict[str, str] = SETUPTOOLS["package-dir"]      # "lagwise.models" -> "models"
PACKAGES: list[str] = SETUPTOOLS["packages"]
PACKAGE_DATA: dict[str, list[str]] = SETUPTOOLS.get("package-data", {})
TRAP = "raise SystemExit('the {name}.py in the working folder was imported')\n"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def source_folder(package: str) -> Path:
    """The repository folder a dotted package name is built from (package-dir mapping)."""
    for prefix, folder in sorted(PACKAGE_DIR.items(), key=lambda kv: -len(kv[0])):
        if package == prefix or package.startswith(prefix + "."):
            rest = package[len(prefix):].lstrip(".")
            return ROOT / folder / Path(*rest.split(".")) if rest else ROOT / folder
    raise AssertionError(f"{package} is not under any package-dir entry")


def package_of(folder: Path) -> str:
    """The dotted package name a repository folder installs as."""
    for prefix, top in PACKAGE_DIR.items():
        try:
            rest = folder.relative_to(ROOT / top)
        except ValueError:
            continue
        return ".".join([prefix, *rest.parts])
    raise AssertionError(f"{folder} is under no package-dir folder")


def is_package_data(path: Path) -> bool:
    """Whether a file is shipped as package data of the listed package that holds it."""
    for package in PACKAGES:
        folder = source_folder(package)
        if folder in path.parents:
            relative = path.relative_to(folder).as_posix()
            if any(fnmatch.fnmatch(relative, glob) for glob in PACKAGE_DATA.get(package, [])):
                return True
    return False


def source_files() -> list[Path]:
    """Every file in the installed folders (models/, desktop/, resources/), caches left out."""
    return sorted(p for top in PACKAGE_DIR.values() for p in (ROOT / top).rglob("*")
                  if p.is_file() and "__pycache__" not in p.parts and p.suffix != ".pyc")


def wheel_name(path: Path) -> str:
    """Where a repository file lands inside the wheel."""
    package = package_of(path.parent)
    return PurePosixPath(*package.split("."), path.name).as_posix()


def test_every_folder_holding_python_files_is_a_listed_package():
    # The packages list in pyproject.toml is explicit: a new subpackage left out of it would
    # work in the editable checkout and be missing from a wheel. A folder may instead ship
    # its scripts as package data (resources/demo/make_demo.py).
    folders = sorted({p.parent for p in source_files() if p.suffix == ".py"})
    assert folders
    forgotten = [f"{f.relative_to(ROOT).as_posix()} (as {package_of(f)})" for f in folders
                 if package_of(f) not in PACKAGES
                 and not all(is_package_data(p) for p in f.glob("*.py"))]
    assert forgotten == [], "add these to [tool.setuptools] packages in pyproject.toml"
    assert all(source_folder(p).is_dir() for p in PACKAGES)


# ----- build, install into a fresh environment ----------------------------------------
def run(command: list, **kwargs) -> subprocess.CompletedProcess:
    done = subprocess.run([str(c) for c in command], capture_output=True, text=True,
                          timeout=kwargs.pop("timeout", 300), **kwargs)
    assert done.returncode == 0, f"{command}\n{done.stdout}\n{done.stderr}"
    return done


@pytest.fixture(scope="module")
def wheel(tmp_path_factory) -> Path:
    """A wheel built from a copy of the checkout (the build writes build/ and egg-info)."""
    source = tmp_path_factory.mktemp("source")
    for path in ROOT.iterdir():
        if path.is_file():
            shutil.copy2(path, source / path.name)
    for folder in [*PACKAGE_DIR.values(), "tests"]:
        shutil.copytree(ROOT / folder, source / folder,
                        ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
    out = tmp_path_factory.mktemp("dist")
    run([sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation",
         "--no-index", "-q", "-w", out, source])
    wheels = list(out.glob("lagwise-*.whl"))
    assert len(wheels) == 1, wheels
    return wheels[0]


@pytest.fixture(scope="module")
def installed(wheel, tmp_path_factory) -> dict:
    """A fresh virtual environment holding the wheel; this environment's packages beside it."""
    env = tmp_path_factory.mktemp("venv") / "env"
    run([sys.executable, "-m", "venv", "--without-pip", env])
    python = env / ("Scripts/python.exe" if os.name == "nt" else "bin/python")
    assert python.is_file(), sorted(p.name for p in env.iterdir())
    query = ("import json, sysconfig; print(json.dumps({k: sysconfig.get_path(k) "
             "for k in ('purelib', 'platlib', 'scripts')}))")
    paths = {k: Path(v) for k, v in json.loads(run([python, "-c", query]).stdout).items()}
    # this environment's site-packages as plain path entries (no .pth hooks run from there)
    ours = dict.fromkeys(sysconfig.get_path(k) for k in ("purelib", "platlib"))
    (paths["purelib"] / "test_environment.pth").write_text("\n".join(ours) + "\n",
                                                           encoding="utf-8")
    run([sys.executable, "-m", "pip", "--python", python, "install", "--no-deps",
         "--no-index", "-q", wheel])
    lagwise = shutil.which("lagwise", path=str(paths["scripts"]))
    assert lagwise is not None, f"no lagwise command in {paths['scripts']}"
    return {"python": python, "lagwise": Path(lagwise), **paths}


@pytest.fixture
def user_folder(tmp_path) -> Path:
    """A working folder with a models.py, desktop.py and resources.py of the user's own."""
    folder = tmp_path / "work"
    folder.mkdir()
    for name in ("models", "desktop", "resources"):
        (folder / f"{name}.py").write_text(TRAP.format(name=name), encoding="utf-8")
    return folder


def clean_env(tmp_path: Path) -> dict[str, str]:
    """The environment without Python path settings; Qt offscreen; settings kept aside."""
    env = {k: v for k, v in os.environ.items()
           if k not in ("PYTHONPATH", "PYTHONHOME", "PYTHONSAFEPATH", "VIRTUAL_ENV")}
    env["QT_QPA_PLATFORM"] = "offscreen"
    for name in ("XDG_CONFIG_HOME", "XDG_DATA_HOME", "XDG_CACHE_HOME"):
        env[name] = str(tmp_path / name.lower())
    return env


# ----- the wheel ----------------------------------------------------------------------
def test_wheel_holds_every_package_file_and_no_tests(wheel):
    with zipfile.ZipFile(wheel) as archive:
        names = set(archive.namelist())
    expected = {wheel_name(p) for p in source_files()}
    assert {"lagwise/resources/demo/demo_diary.csv", "lagwise/resources/demo/demo_truth.json",
            "lagwise/resources/project-format.md"} <= expected
    assert sorted(expected - names) == []
    shipped = {n for n in names if ".dist-info/" not in n}
    assert sorted(shipped - expected) == []          # nothing else: no tests, no build files
    assert not any(PurePosixPath(n).name.startswith(("test_", "conftest")) for n in names)
    assert not any(n.startswith("lagwise/__init__") for n in names)   # a namespace package
    entry_points = next(n for n in names if n.endswith(".dist-info/entry_points.txt"))
    with zipfile.ZipFile(wheel) as archive:
        assert "lagwise = lagwise.desktop.cli:main" in archive.read(entry_points).decode()


# ----- the installed wheel, from a folder with its own models.py ----------------------
def readme_from_python_example() -> str:
    """The first ```python block after "From Python" in README.md."""
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    start = readme.index("From Python")
    block = re.search(r"^```python\n(.*?)^```", readme[start:], re.MULTILINE | re.DOTALL)
    assert block is not None, "README.md: no ```python block after 'From Python'"
    return block.group(1)


def test_readme_from_python_example_runs_against_the_installed_wheel(installed, user_folder,
                                                                     tmp_path):
    check = (
        "\n# ---- appended by the test ----\n"
        "import json, sys, lagwise, lagwise.models, lagwise.desktop, lagwise.resources\n"
        "print(json.dumps({'lagwise': [str(p) for p in lagwise.__path__],\n"
        "                  'files': [m.__file__ for m in (lagwise.models, lagwise.desktop,\n"
        "                                                 lagwise.resources)],\n"
        "                  'bare': sorted({'models', 'desktop', 'resources'} & set(sys.modules)),\n"
        "                  'lagged': list(result.lagged[0].shape)}))\n"
    )
    script = user_folder / "from_python.py"
    script.write_text(readme_from_python_example() + check, encoding="utf-8")
    done = subprocess.run([str(installed["python"]), script.name], cwd=user_folder,
                          env=clean_env(tmp_path), capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stdout + done.stderr
    report = json.loads(done.stdout.strip().splitlines()[-1])
    site = installed["purelib"].resolve()
    for path in report["lagwise"] + report["files"]:
        assert site in Path(path).resolve().parents, f"{path} is not from the installed wheel"
    assert report["bare"] == []
    assert report["lagged"] == [3, 3]


def png_size(path: Path) -> tuple[int, int]:
    """Width and height from a PNG file's header."""
    head = path.read_bytes()[:24]
    assert head[:8] == PNG_SIGNATURE and head[12:16] == b"IHDR", f"{path} is not a PNG"
    return struct.unpack(">II", head[16:24])


def test_installed_lagwise_demo_screenshot(installed, user_folder, tmp_path):
    done = subprocess.run([str(installed["lagwise"]), "demo", "--screenshot", "shot.png"],
                          cwd=user_folder, env=clean_env(tmp_path), capture_output=True,
                          text=True, timeout=300)
    assert done.returncode == 0, done.stdout + done.stderr
    shot = user_folder / "shot.png"
    width, height = png_size(shot)
    assert width >= 1200 and height >= 800
    assert shot.stat().st_size > 20_000
    from PySide6.QtGui import QImage

    image = QImage(str(shot))
    assert not image.isNull()
    colours = {image.pixel(x, y) for x in range(0, width, 40) for y in range(0, height, 40)}
    assert len(colours) > 20, "the picture is (nearly) blank"
