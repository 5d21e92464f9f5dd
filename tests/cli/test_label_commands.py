"""`next`, `label`, `skip`, `undo`, `show`, `status`, `history`, `export` on temporary stores.

Data: scikit-learn's bundled breast-cancer rows (conftest); the true classes answer for the
labeller. The JSON keys checked are the contract in DESIGN.md.
"""

from __future__ import annotations

import csv
import io


def label_some(cli, truth, n):
    """Label the head of the queue n times with its true class; return the keys labelled."""
    keys = []
    for _ in range(n):
        head = cli.json("next", "-n", "1")["queue"][0]["key"]
        result = cli("label", head, truth[head])
        assert result.exit_code == 0, result.output
        keys.append(head)
    return keys


def test_next_json_contract_cold_start(cancer_store):
    doc = cancer_store.json("next", "-n", "5")
    assert doc["cold_start"] is True
    assert [r["rank"] for r in doc["queue"]] == [1, 2, 3, 4, 5]
    row = doc["queue"][0]
    assert set(row) >= {"rank", "key", "predicted", "p", "score", "strategy", "meta"}
    assert set(row["p"]) == {"malignant", "benign"}
    assert row["meta"]["site"].startswith("s")
    assert len({r["key"] for r in doc["queue"]}) == 5


def test_label_refits_and_ranks(cancer_store, cancer_csv):
    truth = cancer_store.truth(cancer_csv)
    label_some(cancer_store, truth, 6)
    doc = cancer_store.json("next", "-n", "10", "--strategy", "entropy")
    assert doc["cold_start"] is False
    assert all(r["strategy"] == "entropy" for r in doc["queue"])
    for r in doc["queue"]:
        assert abs(sum(r["p"].values()) - 1.0) < 1e-3
        assert 0.0 <= r["score"] <= 1.0  # binary entropy in bits
    status = cancer_store.json("status")
    assert status["labelled"] == 6
    assert status["last_fit"]["n_labels"] == 6
    assert set(status) >= {"candidates", "labelled", "skipped", "classes", "last_fit", "advice"}


def test_label_then_undo_gives_back_the_queue(cancer_store, cancer_csv):
    truth = cancer_store.truth(cancer_csv)
    label_some(cancer_store, truth, 5)
    before = cancer_store.json("next", "-n", "10")
    head = before["queue"][0]["key"]
    assert cancer_store("label", head, truth[head]).exit_code == 0
    assert cancer_store.json("next", "-n", "10") != before
    assert cancer_store("undo").exit_code == 0
    after = cancer_store.json("next", "-n", "10")
    before.pop("fit"), after.pop("fit")
    assert after == before


def test_label_errors_leave_store_unchanged(cancer_store, cancer_csv, user_error):
    truth = cancer_store.truth(cancer_csv)
    key = label_some(cancer_store, truth, 1)[0]
    before = cancer_store.dump()
    user_error(cancer_store("label", "no-such-key", "benign"), "no-such-key")
    user_error(cancer_store("label", "c150", "healthy"), "healthy")
    user_error(cancer_store("label", key, truth[key]), key)
    user_error(cancer_store("skip", "no-such-key"), "no-such-key")
    user_error(cancer_store("next", "--strategy", "guess"), "guess")
    assert cancer_store.dump() == before


def test_relabel(cancer_store, cancer_csv):
    truth = cancer_store.truth(cancer_csv)
    key = label_some(cancer_store, truth, 1)[0]
    other = "benign" if truth[key] == "malignant" else "malignant"
    assert cancer_store("label", key, other, "--relabel", "--note", "second look").exit_code == 0
    labels = list(csv.DictReader(io.StringIO(cancer_store("export", "labels").stdout)))
    assert [(r["key"], r["class"], r["note"]) for r in labels] == [(key, other, "second look")]
    assert cancer_store("undo").exit_code == 0
    labels = list(csv.DictReader(io.StringIO(cancer_store("export", "labels").stdout)))
    assert [(r["key"], r["class"]) for r in labels] == [(key, truth[key])]


def test_undo_with_nothing_to_undo(cancer_store, user_error):
    before = cancer_store.dump()
    user_error(cancer_store("undo"), "nothing")
    assert cancer_store.dump() == before


def test_skip_sinks_to_the_bottom(cancer_store, cancer_csv):
    truth = cancer_store.truth(cancer_csv)
    label_some(cancer_store, truth, 4)
    head = cancer_store.json("next", "-n", "1")["queue"][0]["key"]
    assert cancer_store("skip", head).exit_code == 0
    doc = cancer_store.json("next", "-n", "200")
    keys = [r["key"] for r in doc["queue"]]
    assert keys[-1] == head
    assert cancer_store.json("status")["skipped"] == 1
    assert cancer_store("undo").exit_code == 0
    assert cancer_store.json("status")["skipped"] == 0


def test_show(cancer_store, cancer_csv):
    truth = cancer_store.truth(cancer_csv)
    label_some(cancer_store, truth, 6)
    doc = cancer_store.json("show", "c150")
    assert doc["key"] == "c150"
    assert set(doc["p"]) == {"malignant", "benign"}
    for v in doc["p"].values():
        assert 0.0 <= v["low"] <= v["p"] <= v["high"] <= 1.0
    assert len(doc["nearest"]) >= 1
    result = cancer_store("show", "c150")
    assert result.exit_code == 0 and "c150" in result.stdout


def test_history_and_export_predictions(cancer_store, cancer_csv):
    truth = cancer_store.truth(cancer_csv)
    label_some(cancer_store, truth, 6)
    rows = cancer_store.json("history")
    assert len(rows) >= 6
    for r in rows:
        assert set(r) >= {"fit", "session", "n_labels", "mean_entropy", "n_uncertain",
                          "expected_accuracy", "kappa", "at"}
    result = cancer_store("export", "predictions")
    assert result.exit_code == 0
    table = list(csv.DictReader(io.StringIO(result.stdout)))
    assert len(table) == 200 and len({r["key"] for r in table}) == 200
    assert list(table[0])[:10] == ["key", "predicted", "p_malignant", "p_benign", "p_low",
                                   "p_high", "entropy", "labelled", "label", "site"]
    assert sum(int(r["labelled"]) for r in table) == 6
    for r in table:
        assert float(r["p_low"]) <= float(r[f"p_{r['predicted']}"]) <= float(r["p_high"])
