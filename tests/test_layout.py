"""The agreed layout: ``migrations/`` and ``demo/`` beside ``labelq/``, shipped inside the wheel.

The top-level folders are mapped to the import packages ``labelq.migrations`` and ``labelq.demo``
(setuptools' package-dir mapping, pyproject.toml). These tests check that the mapping lists every
package, that the installed revisions are the checkout's, that ``alembic upgrade head`` works from
the repository root as the root ``alembic.ini`` documents, and that a wheel built from the tree,
installed alone in a new virtual environment, runs the demo and upgrades an older store.
"""

from __future__ import annotations

import fnmatch
import json
import os
import shutil
import site
import sqlite3
import subprocess
import sys
import sysconfig
import zipfile
from contextlib import closing
from pathlib import Path

import pytest

import labelq.migrations
from labelq.store.migrate import SCRIPT_LOCATION, head_revision

REPO = Path(__file__).resolve().parents[1]
MAPPED = {"labelq.migrations": "migrations", "labelq.demo": "demo"}
"""The package-dir mapping pyproject.toml is expected to hold."""

_NOT_BUILT = {"build", "dist", "tests", "__pycache__"}
"""Top-level entries of the checkout a wheel build never reads."""

REVISIONS = sorted(path.name for path in (REPO / "migrations" / "versions").glob("*.py"))


def _pyproject() -> dict:
    tomllib = pytest.importorskip("tomllib")
    with open(REPO / "pyproject.toml", "rb") as handle:
        return tomllib.load(handle)


def _packages_in(folder: Path, name: str) -> set[str]:
    """``name`` and every folder below ``folder`` holding Python files, as dotted package names."""
    found = {name}
    for path in folder.rglob("*.py"):
        parent = path.parent.relative_to(folder)
        if "__pycache__" not in parent.parts and parent.parts:
            found.add(".".join((name, *parent.parts)))
    return found


def _version_num(path: Path) -> str:
    """The revision stamped in a SQLite store, read with plain sqlite3 (common practice)."""
    with closing(sqlite3.connect(path)) as connection:
        return connection.execute("SELECT version_num FROM alembic_version").fetchone()[0]


def _run(command: list, **kwargs) -> subprocess.CompletedProcess:
    result = subprocess.run(command, capture_output=True, text=True, timeout=900, **kwargs)
    assert result.returncode == 0, (
        f"{command} exited {result.returncode}\n{result.stdout[-3000:]}\n{result.stderr[-3000:]}"
    )
    return result


def _environment(**changes: str) -> dict[str, str]:
    """This process's environment without a store or labeller chosen, plus ``changes``."""
    env = {k: v for k, v in os.environ.items() if k not in ("LABELQ_DB", "LABELQ_BY", "PYTHONPATH")}
    env["NO_COLOR"] = "1"
    env.update(changes)
    return env


def test_pyproject_lists_every_package_and_maps_the_top_level_folders() -> None:
    # The mapping is what ships migrations/ and demo/; an explicit package list can fall behind
    # the tree, so it is compared with the folders (setuptools' package-dir documentation).
    config = _pyproject()["tool"]["setuptools"]
    assert config["package-dir"] == MAPPED
    expected = _packages_in(REPO / "labelq", "labelq")
    for name, folder in MAPPED.items():
        expected |= _packages_in(REPO / folder, name)
    assert set(config["packages"]) == expected
    assert not (REPO / "labelq" / "migrations").exists() and not (REPO / "labelq" / "demo").exists()


def test_the_store_reads_the_revisions_of_the_top_level_folder() -> None:
    # Editable install: the checkout's folder itself; installed wheel (CI): a copy equal to it.
    assert SCRIPT_LOCATION == Path(labelq.migrations.__file__).parent
    assert REVISIONS and sorted(p.name for p in (SCRIPT_LOCATION / "versions").glob("*.py")) == REVISIONS
    for name in ["env.py", "script.py.mako", *(f"versions/{n}" for n in REVISIONS)]:
        assert (SCRIPT_LOCATION / name).read_bytes() == (REPO / "migrations" / name).read_bytes(), name


def _alembic() -> list[str]:
    """The ``alembic`` command of this environment (its console script, as a user runs it)."""
    script = Path(sys.executable).parent / "alembic"
    return [str(script)] if script.exists() else [sys.executable, "-m", "alembic"]


def test_alembic_upgrade_head_from_the_repository_root(tmp_path: Path) -> None:
    # The URL convention documented in alembic.ini: -x db=PATH, else $LABELQ_DB, else ./labelq.db.
    by_option, by_variable = tmp_path / "option.db", tmp_path / "variable.db"
    default_store = (REPO / "labelq.db").exists()
    _run([*_alembic(), "-x", f"db={by_option}", "upgrade", "head"], cwd=REPO, env=_environment())
    assert _version_num(by_option) == head_revision()
    _run([*_alembic(), "upgrade", "0002"], cwd=REPO,
         env=_environment(LABELQ_DB=str(by_variable)))
    assert _version_num(by_variable) == "0002"
    _run([*_alembic(), "-x", f"db=sqlite:///{by_variable}", "upgrade", "head"], cwd=REPO,
         env=_environment(LABELQ_DB=str(tmp_path / "not-this.db")))
    assert _version_num(by_variable) == head_revision()
    assert not (tmp_path / "not-this.db").exists()
    assert (REPO / "labelq.db").exists() == default_store  # the default store was not touched


def _copy_of_the_tree(destination: Path) -> Path:
    """The files a build reads, without caches, builds, stores or virtual environments.

    Building a copy keeps stale ``build/`` output of an earlier build out of the wheel and leaves
    the checkout untouched (setuptools builds in the source folder).
    """
    def ignore(folder: str, names: list[str]) -> set[str]:
        if Path(folder) != REPO:
            return {name for name in names if name == "__pycache__"}
        return {name for name in names if name.startswith(".") or name in _NOT_BUILT
                or fnmatch.fnmatch(name, "*.egg-info") or fnmatch.fnmatch(name, "*venv*")
                or fnmatch.fnmatch(name, "*.db*")}

    shutil.copytree(REPO, destination, ignore=ignore)
    return destination


def _wheel(tmp_path: Path) -> Path:
    source = _copy_of_the_tree(tmp_path / "source")
    dist = tmp_path / "dist"
    _run([sys.executable, "-m", "pip", "wheel", ".", "--no-deps", "-w", str(dist)], cwd=source)
    (wheel,) = dist.glob("labelq-*.whl")
    return wheel


def _fresh_environment(tmp_path: Path, wheel: Path) -> Path:
    """A new virtual environment holding the wheel; the dependencies are borrowed from this one.

    The wheel goes in with ``--no-deps`` into an environment without pip (``pip --python``);
    only then a ``.pth`` file appends this environment's site-packages for numpy, scipy,
    SQLAlchemy, Alembic, Typer and Rich. Folders named in a ``.pth`` file come after the
    environment's own site-packages and their own ``.pth`` files are not read, so this
    environment's labelq (editable or not) cannot shadow the wheel's (the site module's rules;
    checked below all the same).
    """
    env_dir = tmp_path / "venv"
    _run([sys.executable, "-m", "venv", "--without-pip", str(env_dir)])
    python = env_dir / "bin" / "python"
    _run([sys.executable, "-m", "pip", "--python", str(python), "install", "--no-deps",
          "--no-index", "--quiet", str(wheel)])
    purelib = _run([str(python), "-c", "import sysconfig; print(sysconfig.get_path('purelib'))"])
    borrowed = [*site.getsitepackages(), sysconfig.get_path("purelib"), sysconfig.get_path("platlib")]
    (Path(purelib.stdout.strip()) / "_labelq_test_dependencies.pth").write_text(
        "".join(f"{folder}\n" for folder in dict.fromkeys(borrowed)))
    return env_dir


@pytest.mark.slow
def test_wheel_ships_migrations_and_demo_and_works_alone(tmp_path: Path) -> None:
    wheel = _wheel(tmp_path)
    names = set(zipfile.ZipFile(wheel).namelist())
    shipped = {
        "labelq/migrations/__init__.py", "labelq/migrations/env.py",
        "labelq/migrations/script.py.mako", "labelq/demo/__init__.py", "labelq/demo/orchard.py",
        *(f"labelq/migrations/versions/{name}" for name in REVISIONS),
    }
    assert shipped <= names
    modules = {f"labelq/{p.relative_to(REPO / 'labelq').as_posix()}"
               for p in (REPO / "labelq").rglob("*.py")}
    assert modules <= names  # every module of the tree, so no package is missing from the list
    assert all(name.startswith(("labelq/", "labelq-")) for name in names), sorted(names)

    env_dir = _fresh_environment(tmp_path, wheel)
    python, command = str(env_dir / "bin" / "python"), str(env_dir / "bin" / "labelq")
    env = _environment(PATH=f"{env_dir / 'bin'}{os.pathsep}{os.environ.get('PATH', '')}")
    probe = _run([python, "-c", (
        "import json, labelq, labelq.demo.orchard as o, labelq.store.migrate as m; "
        "print(json.dumps([labelq.__file__, o.__file__, str(m.SCRIPT_LOCATION), m.head_revision()]))"
    )], cwd=tmp_path, env=env)
    *files, head = json.loads(probe.stdout)
    for file in files:
        assert Path(file).resolve().is_relative_to(env_dir.resolve()), file
    assert head == head_revision()

    demo = tmp_path / "demo"
    _run([command, "demo", "--dir", str(demo)], cwd=tmp_path, env=env)
    assert (demo / "orchard.db").is_file() and _version_num(demo / "orchard.db") == head
    status = json.loads(_run([command, "status", "--json", "--db", str(demo / "orchard.db")],
                             cwd=tmp_path, env=env).stdout)
    assert status["candidates"] == 3000 and status["labelled"] > 0

    # An older store holding a pool: made at the head by the wheel's labelq, taken down to the
    # first revision with the checkout's alembic.ini, then opened by the wheel's labelq again.
    old = tmp_path / "old.db"
    _run([command, "init", "--classes", "export,local,juice", "--db", str(old)], cwd=tmp_path, env=env)
    _run([command, "import", str(demo / "orchard.csv"), "--id", "key", "--db", str(old)],
         cwd=tmp_path, env=env)
    _run([python, "-m", "alembic", "-c", str(REPO / "alembic.ini"), "-x", f"db={old}",
          "downgrade", "0001"], cwd=tmp_path, env=env)
    assert _version_num(old) == "0001"
    status = json.loads(_run([command, "status", "--json", "--db", str(old)],
                             cwd=tmp_path, env=env).stdout)
    assert status["candidates"] == 3000 and status["labelled"] == 0
    assert _version_num(old) == head
