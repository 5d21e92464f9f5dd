"""The scripted day ``demo/day.sh``: labelq's commands end to end on the invented orchard files.

The checks on its outputs follow the command-line contract of DESIGN.md ("Machine-readable
output": ``export predictions`` columns, ``simulate --json`` and ``status --json`` keys).
"""

from __future__ import annotations

import csv
import json
import os
import shutil
import stat
import subprocess
import sys
from pathlib import Path

import pytest

from labelq.demo import GRADES

REPO = Path(__file__).resolve().parents[1]
DAY = REPO / "demo" / "day.sh"
LABELS = 12
"""Labels the scripted day gives."""


def _environment(path_first: Path | None = None) -> dict[str, str]:
    """This environment's labelq and Python first on PATH, no store or labeller preset."""
    env = {k: v for k, v in os.environ.items() if k not in ("LABELQ_DB", "LABELQ_BY")}
    folders = [str(path_first)] if path_first else []
    folders += [str(Path(sys.executable).parent), env.get("PATH", "")]
    env.update(PATH=os.pathsep.join(folders), PYTHON=sys.executable, NO_COLOR="1")
    return env


def _day(folder: Path, env: dict[str, str]) -> subprocess.CompletedProcess:
    return subprocess.run(["sh", str(DAY), str(folder)], env=env, capture_output=True, text=True,
                          timeout=1800)


def _read_csv(path: Path) -> list[dict[str, str]]:
    with open(path, newline="", encoding="utf-8") as handle:
        return list(csv.DictReader(handle))


@pytest.mark.slow
def test_a_day_labels_twelve_apples_exports_and_replays(tmp_path: Path) -> None:
    folder = tmp_path / "day"
    env = _environment()
    result = _day(folder, env)
    assert result.returncode == 0, result.stdout[-3000:] + result.stderr[-3000:]
    assert result.stdout.count("-- label ") == LABELS
    assert f"== done: {folder}" in result.stdout
    # the labels fall on three days (the day's clock): `history` groups them by day
    for day in ("2026-09-21", "2026-09-22", "2026-09-23"):
        assert day in result.stdout

    truth = {row["key"]: row["grade"] for row in _read_csv(folder / "orchard_truth.csv")}
    graded = _read_csv(folder / "graded.csv")
    assert [row["key"] for row in graded] == list(truth)  # every apple, in the pool's order
    assert {"predicted", "p_low", "p_high", "entropy", "labelled", "bin", "picked_on"} <= set(graded[0])
    for row in graded:
        assert row["predicted"] in GRADES
        assert sum(float(row[f"p_{grade}"]) for grade in GRADES) == pytest.approx(1.0, abs=1e-5)
    assert sum(row["labelled"] == "1" for row in graded) == LABELS

    replay = json.loads((folder / "replay.json").read_text(encoding="utf-8"))
    assert 0.0 <= replay["full_pool_accuracy"] <= 1.0
    assert replay["strategies"]
    for curve in replay["strategies"].values():
        assert {"labels", "accuracy_mean", "accuracy_sd", "labels_to_95", "labels_to_99"} <= set(curve)
        assert curve["labels"][-1] == LABELS
        assert len(curve["accuracy_mean"]) == len(curve["accuracy_sd"]) == len(curve["labels"])

    # the skip was undone and every label was answered from the hidden grades
    status = subprocess.run(["labelq", "status", "--json", "--db", str(folder / "orchard.db")],
                            env=env, capture_output=True, text=True, check=True)
    summary = json.loads(status.stdout)
    assert (summary["candidates"], summary["labelled"], summary["skipped"]) == (3000, LABELS, 0)
    labels = subprocess.run(["labelq", "export", "labels", "--db", str(folder / "orchard.db")],
                            env=env, capture_output=True, text=True, check=True)
    given = list(csv.DictReader(labels.stdout.splitlines()))
    assert len(given) == LABELS
    assert all(row["class"] == truth[row["key"]] and row["by"] == "grader" for row in given)


def test_a_failing_step_stops_the_day(tmp_path: Path) -> None:
    # A labelq whose `import` fails: the script must stop there with that exit status (set -e).
    fake = tmp_path / "bin"
    fake.mkdir()
    real = shutil.which("labelq", path=_environment()["PATH"])
    assert real is not None
    script = fake / "labelq"
    script.write_text(f'#!/bin/sh\n[ "$1" = import ] && exit 3\nexec "{real}" "$@"\n')
    script.chmod(script.stat().st_mode | stat.S_IXUSR)
    folder = tmp_path / "day"
    result = _day(folder, _environment(path_first=fake))
    assert result.returncode == 3
    assert (folder / "orchard.db").exists() and not (folder / "graded.csv").exists()
    assert "== the queue" not in result.stdout


def test_the_day_refuses_a_folder_holding_a_store(tmp_path: Path) -> None:
    (tmp_path / "orchard.db").write_bytes(b"")
    result = _day(tmp_path, _environment())
    assert result.returncode == 2 and "already exists" in result.stderr
    assert not (tmp_path / "orchard.csv").exists()
