"""`init`, `import` and their bad inputs: exit code 2, one line naming the problem, store unchanged.

The bad-input list is the foundation issue's; the expectations (one line, exit 2, nothing changed)
are this project's contract in DESIGN.md. Data: scikit-learn's breast-cancer rows (conftest).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from labelq.cli.app import app


@pytest.mark.sqlite_only("touches no store")
def test_help_lists_every_command(cli):
    """Each command has its own line in the Commands section (its name as the line's first
    word, so "label" is not found inside "labelq" or "labels")."""
    result = cli.runner.invoke(app, ["--help"])
    assert result.exit_code == 0
    listed = {line.split()[0] for line in result.output.split("Commands:")[1].splitlines()
              if line.startswith("  ") and line.split()}
    assert listed == {"init", "import", "next", "show", "label", "labels", "skip", "undo",
                      "session", "status", "audit", "disputes", "history", "export", "simulate", "demo",
                      "check", "rebuild"}


def test_init_then_import(cli, cancer_csv):
    assert cli("init", "--classes", "malignant,benign").exit_code == 0
    doc = cli.json("import", cancer_csv, "--id", "key")
    assert doc["added"] == 200
    assert len(doc["features"]) == 30  # the 30 numeric columns of the data set
    assert doc["metadata"] == ["site", "truth"]
    assert cli.counts()["candidates"] == 200


def test_init_refuses_existing_store(cancer_store, user_error):
    before = cancer_store.dump()
    user_error(cancer_store("init", "--classes", "a,b"), "exists")
    assert cancer_store.dump() == before


def test_init_needs_two_classes(cli, user_error):
    user_error(cli("init", "--classes", "only"))
    assert cli.dump() == {}


@pytest.mark.sqlite_only("a folder given as the store file")
def test_db_is_a_directory(tmp_path, cli, user_error):
    result = cli.runner.invoke(app,
                               ["status", "--db", str(tmp_path)])
    user_error(result, str(tmp_path))


@pytest.mark.sqlite_only("a text file given as the store file")
def test_db_is_not_a_store(tmp_path, cli, user_error):
    other = tmp_path / "notes.txt"
    other.write_text("shopping list\n")
    result = cli.runner.invoke(app,
                               ["status", "--db", str(other)])
    user_error(result, "notes.txt")
    assert other.read_text() == "shopping list\n"


def test_missing_store(cli, user_error):
    user_error(cli("status"), "init")


def _bad(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_bytes(text.encode("utf-8"))
    return path


HEADER = "key,site,a,b\n"


@pytest.mark.parametrize("name,text,fragments", [
    ("empty.csv", "", ["empty.csv"]),
    ("dupe.csv", HEADER + "k1,x,1,2\nk1,y,3,4\n", ["dupe.csv", "k1"]),
    ("blank.csv", HEADER + "k1,x,1,2\n ,y,3,4\n", ["blank.csv", "line 3"]),
    ("text.csv", HEADER + "k1,x,1,2\nk2,y,3,oops\n", ["text.csv", "line 3", "oops"]),
    ("nan.csv", HEADER + "k1,x,1,2\nk2,y,nan,4\n", ["nan.csv", "line 3", "nan"]),
    ("inf.csv", HEADER + "k1,x,1,2\nk2,y,3,inf\n", ["inf.csv", "line 3", "inf"]),
    ("short.csv", HEADER + "k1,x,1\n", ["short.csv", "line 2"]),
])
def test_import_bad_file(cancer_store, tmp_path, name, text, fragments, user_error):
    before = cancer_store.dump()
    path = _bad(tmp_path, name, text)
    result = cancer_store("import", path, "--id", "key", "--features", "a,b")
    user_error(result, *fragments)
    assert cancer_store.dump() == before


def test_import_missing_file(cancer_store, tmp_path, user_error):
    before = cancer_store.dump()
    user_error(cancer_store("import", tmp_path / "nope.csv", "--id", "key"), "nope.csv")
    assert cancer_store.dump() == before


def test_import_key_already_stored(cancer_store, cancer_csv, user_error):
    before = cancer_store.dump()
    user_error(cancer_store("import", cancer_csv, "--id", "key"), "c000")
    assert cancer_store.dump() == before


def test_import_other_features_refused(cancer_store, tmp_path, user_error, csv_file):
    before = cancer_store.dump()
    path = csv_file(tmp_path / "other.csv", ["key", "a", "b"], [["z1", "1", "2"]])
    user_error(cancer_store("import", path, "--id", "key"), "other.csv")
    assert cancer_store.dump() == before


def test_import_unknown_class_in_labels(cli, cancer_csv, user_error):
    assert cli("init", "--classes", "malignant,healthy").exit_code == 0
    before = cli.dump()
    result = cli("import", cancer_csv, "--id", "key", "--labels", "truth")
    user_error(result, "benign")
    assert cli.dump() == before


def test_import_with_known_labels(cli, tmp_path, csv_file):
    assert cli("init", "--classes", "malignant,benign").exit_code == 0
    path = csv_file(tmp_path / "some.csv", ["key", "a", "b", "truth"],
                     [["k1", "1", "2", "benign"], ["k2", "3", "4", ""], ["k3", "0", "1", "malignant"]])
    doc = cli.json("import", path, "--id", "key", "--labels", "truth")
    assert doc["labels"] == 2
    assert cli.json("status")["labelled"] == 2


def test_next_on_an_empty_store(cli, user_error):
    assert cli("init", "--classes", "malignant,benign").exit_code == 0
    before = cli.dump()
    user_error(cli("next"), "no candidates")
    user_error(cli("export", "predictions"), "no candidates")
    assert cli.dump() == before


def test_every_candidate_labelled(cli, tmp_path, csv_file):
    """A pool with nothing left to label: an empty queue, a snapshot over the whole pool."""
    assert cli("init", "--classes", "malignant,benign").exit_code == 0
    path = csv_file(tmp_path / "done.csv", ["key", "a", "b", "truth"],
                    [["k1", "1", "2", "benign"], ["k2", "3", "1", "malignant"],
                     ["k3", "0", "0", "benign"]])
    assert cli("import", path, "--id", "key", "--labels", "truth").exit_code == 0
    assert cli.json("next")["queue"] == []
    assert cli.json("status")["snapshot"]["mean_entropy"] >= 0.0


@pytest.mark.sqlite_only("touches no store")
def test_version(cli):
    result = cli.runner.invoke(app, ["--version"])
    assert result.exit_code == 0
    assert result.stdout.startswith("labelq 0.1.0 (store schema ")
