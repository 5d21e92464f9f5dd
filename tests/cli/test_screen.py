"""What the screen says must be true: cold-start tables, batch marks, held rows, --json on every
command, history panels, label echoes, usage errors as one line, internal errors not disguised.

Data: scikit-learn's bundled breast-cancer rows (conftest). Expected texts are this project's
wording (DESIGN.md, README); "common practice" where nothing more specific applies.
"""

from __future__ import annotations

import json

import pytest

from labelq.cli.app import app


def label_head(cli, truth, n):
    for _ in range(n):
        head = cli.json("next", "-n", "1")["queue"][0]["key"]
        assert cli("label", head, truth[head]).exit_code == 0


def test_cold_start_table_shows_no_prediction_only_why(cancer_store, monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")
    monkeypatch.setenv("COLUMNS", "100")
    result = cancer_store("next", "-n", "3")
    assert result.exit_code == 0
    header = [line for line in result.stdout.splitlines() if "key" in line][0]
    assert "why" in header
    for absent in ("predicted", "margin", " p "):
        assert absent not in header
    assert "represents a cluster of" in result.stdout
    doc = cancer_store.json("next", "-n", "3")
    assert doc["cold_start"] is True
    assert all(r["reason"].startswith("represents a cluster of") for r in doc["queue"])


def test_batch_is_marked_and_said_in_the_header(cancer_store, cancer_csv, monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")
    monkeypatch.setenv("COLUMNS", "120")
    label_head(cancer_store, cancer_store.truth(cancer_csv), 4)
    result = cancer_store("next", "-n", "4")
    assert "Rows marked + form a batch chosen together" in result.stdout
    rows = [line for line in result.stdout.splitlines() if line.lstrip().startswith("+")]
    assert len(rows) == 4
    doc = cancer_store.json("next", "-n", "4")
    reasons = [r["reason"] for r in doc["queue"]]
    assert "spread" not in reasons[0] and all("chosen to spread the batch" in r
                                              for r in reasons[1:])


def test_rows_held_for_another_labeller_are_counted(cancer_store, monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")
    assert cancer_store("next", "-n", "1", "--by", "ana").exit_code == 0  # ana holds the head
    result = cancer_store("next", "-n", "2", "--by", "ben")
    assert "1 row held for another labeller until" in result.stdout
    assert cancer_store.json("next", "--by", "ben")["held_for_others"] == 1
    # ben's `next` claimed his own head in turn: ana now sees that one held
    assert cancer_store.json("next", "--by", "ana")["held_for_others"] == 1


def test_label_json_echoes_what_was_recorded(cancer_store):
    head = cancer_store.json("next", "-n", "1")["queue"][0]["key"]
    doc = cancer_store.json("label", head, "benign", "--by", "ana", "--note", "firm")
    assert doc["labelled"] == {"key": head, "class": "benign", "by": "ana", "note": "firm",
                               "disputed": False}
    assert "queue" in doc


@pytest.mark.parametrize("args", [["status"], ["history"], ["check"],
                                  ["export", "labels"], ["skip", "c001"]])
def test_json_everywhere_gives_one_document(cancer_store, args):
    """--json prints exactly one JSON document on stdout (DESIGN.md contract)."""
    result = cancer_store(*args, "--json")
    assert result.exit_code == 0, result.output
    json.loads(result.stdout)
    if args[0] == "skip":
        undone = cancer_store("undo", "--json")
        assert undone.exit_code == 0, undone.output
        json.loads(undone.stdout)


def test_session_json_prompts_on_stderr_summary_on_stdout(cancer_store):
    head = cancer_store.json("next", "-n", "1")["queue"][0]["key"]
    result = cancer_store("session", "--json", input="2\nq\n")
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    assert doc["labels"] == 1 and doc["undos"] == 0
    assert head in result.stderr


@pytest.mark.sqlite_only("the demo builds its own SQLite file in a folder")
def test_demo_json(cli, tmp_path):
    result = cli.runner.invoke(app, ["demo", "--dir", str(tmp_path / "d"), "--json"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    assert len(doc["labelled"]) == 8 and doc["status"]["labelled"] == 8
    assert (tmp_path / "d" / "orchard.db").exists()


def test_history_chart_keeps_each_quantity_on_its_own_scale(cancer_store, cancer_csv, monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")
    label_head(cancer_store, cancer_store.truth(cancer_csv), 4)
    out = cancer_store("history").stdout
    assert "mean entropy (bits) by labels given" in out
    assert "expected accuracy by labels given" in out
    assert max(len(line) for line in out.splitlines()) <= 80


def test_usage_errors_are_one_line_with_exit_code_2(cancer_store, user_error):
    before = cancer_store.dump()
    user_error(cancer_store("next", "--strategy", "guess"), "guess", "margin")
    user_error(cancer_store("export", "everything"), "everything", "predictions")
    user_error(cancer_store("status", "--bogus"), "--bogus")
    assert cancer_store.dump() == before


def test_an_internal_failure_is_not_shown_as_a_user_error(cancer_store, monkeypatch):
    """Only LabelqError becomes exit code 2; a bug (here a ValueError from inside the engine)
    propagates as an exception (common practice: bugs must look like bugs)."""
    from labelq.loop import reports

    def broken(store):
        raise ValueError("matrix is not positive definite")

    monkeypatch.setattr(reports, "status", broken)
    result = cancer_store("status")
    assert result.exit_code != 2
    assert isinstance(result.exception, ValueError)
