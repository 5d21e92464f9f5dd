"""The interactive session driven through a pipe, and the demo in an empty folder.

Data: scikit-learn's bundled breast-cancer rows (conftest); the demo's data are the invented
orchard scenario shipped with labelq.
"""

from __future__ import annotations

import pytest

from labelq.cli.app import app

LIVE_LABELS = ("SELECT COUNT(*) FROM label_events l WHERE l.retracts_id IS NULL AND NOT EXISTS "
               "(SELECT 1 FROM label_events r WHERE r.retracts_id = l.id)")


def live_labels(cli):
    return cli.query(LIVE_LABELS)[0][0]


def test_session_through_a_pipe(cancer_store):
    # three labels (by number and by name), a skip, an undo (takes back the skip), then quit
    result = cancer_store("session", "--by", "tester", input="1\nbenign\n2\ns\nu\nq\n")
    assert result.exit_code == 0, result.output
    assert "Session over: 3 labels and 0 skips kept (1 undone)" in result.stdout
    # once per item: labels given in this sitting and which way the pool's uncertainty went
    assert "1 label this sitting" in result.stdout
    assert "3 labels this sitting; pool uncertainty" in result.stdout
    status = cancer_store.json("status")
    assert status["labelled"] == 3 and status["skipped"] == 0
    sessions = cancer_store.query("SELECT by, ended_at FROM sessions")
    bys = {r[0] for r in cancer_store.query("SELECT by FROM label_events")}
    assert len(sessions) == 1 and sessions[0][0] == "tester" and sessions[0][1] is not None
    assert bys == {"tester"}


def test_session_ends_at_end_of_input(cancer_store):
    result = cancer_store("session", input="1\n")
    assert result.exit_code == 0, result.output
    assert live_labels(cancer_store) == 1


def test_session_rejects_nonsense_and_goes_on(cancer_store):
    result = cancer_store("session", input="banana\n7\nq\n")
    assert result.exit_code == 0
    assert "not understood" in result.stdout
    assert live_labels(cancer_store) == 0


@pytest.mark.sqlite_only("the demo builds its own SQLite file in a folder")
def test_demo_in_an_empty_folder(tmp_path, cli):
    result = cli.runner.invoke(app, ["demo", "--dir", str(tmp_path / "demo")])
    assert result.exit_code == 0, result.output
    db = tmp_path / "demo" / "orchard.db"
    assert db.exists()
    assert "labelq session --db" in result.stdout
    assert live_labels(cli.__class__(db)) == 8
    again = cli.runner.invoke(app, ["demo", "--dir", str(tmp_path / "demo")])
    assert again.exit_code == 2


def test_session_counts_labels_net_of_undos(cancer_store):
    # two labels, then both taken back: the closing line counts none kept
    result = cancer_store("session", "--by", "tester", input="1\n2\nu\nu\nq\n")
    assert result.exit_code == 0, result.output
    assert "Session over: 0 labels and 0 skips kept (2 undone)" in result.stdout
    assert "2 labels this sitting" in result.stdout
    assert live_labels(cancer_store) == 0

