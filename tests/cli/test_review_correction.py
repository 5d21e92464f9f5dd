"""Review and correction from the command line: `labels`, `show`'s label history, `undo KEY`,
classes by name in any case or by number, and the `label` column of `export predictions`.

Data: scikit-learn's bundled breast-cancer rows (conftest: 200 rows, classes malignant, benign);
the true classes answer for the labeller. The keys, orders, messages and exit codes checked are
this project's contracts (issue 11, "Review and correction"; DESIGN.md: one-line errors with exit
code 2 that change nothing, checked by comparing the whole store, conftest's Cli.dump): common
practice, no outside source.
"""

from __future__ import annotations

import csv
import io
import json

import pytest

LABEL_KEYS = {"key", "class", "by", "at", "note", "p_model"}


def label(cli, key, class_, *extra):
    result = cli("label", key, class_, *extra)
    assert result.exit_code == 0, result.output
    return result


@pytest.fixture
def reviewed(cancer_store, cancer_csv):
    """The cancer store with five labels by two labellers, in this order:
    m0 (ana, note), b0 (ben), m1 (ana), b1 (ana), m2 (ben); returns (cli, keys in label order,
    truth)."""
    truth = cancer_store.truth(cancer_csv)
    m = [k for k, v in truth.items() if v == "malignant"][:3]
    b = [k for k, v in truth.items() if v == "benign"][:2]
    plan = [(m[0], "ana", "clear case"), (b[0], "ben", None), (m[1], "ana", None),
            (b[1], "ana", None), (m[2], "ben", None)]
    for key, who, note in plan:
        label(cancer_store, key, truth[key], "--by", who, *(["--note", note] if note else []))
    return cancer_store, [key for key, _, _ in plan], truth


def predictions(cli, *extra) -> list[dict]:
    result = cli("export", "predictions", *extra)
    assert result.exit_code == 0, result.output
    if extra:
        return json.loads(result.stdout)
    return list(csv.DictReader(io.StringIO(result.stdout)))


# --- labels --------------------------------------------------------------------------------


def test_labels_newest_first_with_the_current_fit_probability(reviewed):
    cli, keys, truth = reviewed
    rows = cli.json("labels")
    assert [r["key"] for r in rows] == keys[::-1]
    assert all(set(r) == LABEL_KEYS for r in rows)
    assert [r["class"] for r in rows] == [truth[k] for k in keys[::-1]]
    assert [r["by"] for r in rows] == ["ben", "ana", "ana", "ben", "ana"]
    assert rows[-1]["note"] == "clear case" and rows[0]["note"] is None
    assert all(r["at"].endswith("Z") and len(r["at"]) == len("2026-12-01T22:03:10Z") for r in rows)
    # The scores table holds a row for every candidate, labelled or not: export predictions
    # lists all 200, and p_model is the same fit's probability of the labelled class.
    table = {r["key"]: r for r in predictions(cli)}
    assert len(table) == 200
    for r in rows:
        assert abs(r["p_model"] - float(table[r["key"]][f"p_{r['class']}"])) < 1e-6


def test_labels_filters_by_class_and_labeller_and_count(reviewed):
    cli, keys, truth = reviewed
    benign = [k for k in keys[::-1] if truth[k] == "benign"]
    for given in ("benign", "BENIGN", "Benign", "2"):
        assert [r["key"] for r in cli.json("labels", "--class", given)] == benign
    assert [r["key"] for r in cli.json("labels", "--by", "ben")] == [keys[4], keys[1]]
    assert [r["key"] for r in cli.json("labels", "--by", "ben", "--class", "1")] == [keys[4]]
    assert cli.json("labels", "--by", "nobody") == []
    assert [r["key"] for r in cli.json("labels", "-n", "2")] == keys[::-1][:2]


def test_labels_disagree_orders_by_p_model_ascending(reviewed):
    cli, keys, _ = reviewed
    rows = cli.json("labels", "--disagree")
    assert sorted(r["key"] for r in rows) == sorted(keys)
    p = [r["p_model"] for r in rows]
    assert p == sorted(p)
    assert [r["key"] for r in cli.json("labels", "--disagree", "-n", "2")] == [r["key"] for r in rows[:2]]


def test_labels_unknown_class_is_a_user_error(reviewed, user_error):
    cli, _, _ = reviewed
    before = cli.dump()
    user_error(cli("labels", "--class", "benigh"), "unknown class 'benigh'; did you mean 'benign'?",
               "(classes: 1 malignant, 2 benign)")
    assert cli.dump() == before


def test_labels_table_reads_without_colour_in_80_columns(reviewed, monkeypatch):
    cli, keys, _ = reviewed
    monkeypatch.setenv("NO_COLOR", "1")
    monkeypatch.setenv("COLUMNS", "80")
    long_note = "rim uneven on two sides, second opinion wanted before it goes into the set " * 2
    label(cli, keys[2], "benign", "--relabel", "--note", long_note.strip(), "--by", "cy")
    for args, heading in ((("labels",), "5 labels, newest first"),
                          (("labels", "--disagree"), "disagrees with most, for review")):
        result = cli(*args)
        assert result.exit_code == 0, result.output
        out = result.stdout
        assert "\x1b[" not in out
        assert max(len(line) for line in out.splitlines()) <= 80
        assert heading in out.splitlines()[0] + " " + out.splitlines()[1]
        assert "Labels per labeller: ana 2, ben 2, cy 1" in out
        assert "rim uneven" in out and "p model" in out
    empty = cli("labels", "--by", "nobody")
    assert empty.exit_code == 0 and empty.stdout.strip() == "No labels match the filters."


def test_labels_on_a_store_without_labels(cancer_store):
    assert cancer_store.json("labels") == []
    assert cancer_store("labels").stdout.strip() == "No labels yet."


# --- show ----------------------------------------------------------------------------------


def test_show_gives_the_current_label_and_its_history(reviewed, monkeypatch):
    cli, keys, truth = reviewed
    key = keys[0]
    doc = cli.json("show", key)
    assert (doc["label"], doc["by"], doc["note"]) == (truth[key], "ana", "clear case")
    assert doc["at"].endswith("Z")
    assert [(e["kind"], e["class"]) for e in doc["history"]] == [("label", truth[key])]
    other = "benign" if truth[key] == "malignant" else "malignant"
    label(cli, key, other, "--relabel", "--note", "second look", "--by", "ben")
    assert cli("undo", key, "--by", "cy").exit_code == 0
    doc = cli.json("show", key)
    assert (doc["label"], doc["by"], doc["note"]) == (truth[key], "ana", "clear case")
    assert [(e["kind"], e["class"], e["by"], e["note"]) for e in doc["history"]] == [
        ("label", truth[key], "ana", "clear case"),
        ("label", other, "ben", "second look"),
        ("undo-label", other, "cy", None),
    ]
    assert set(doc["history"][0]) == {"kind", "class", "by", "at", "note"}
    monkeypatch.setenv("NO_COLOR", "1")
    monkeypatch.setenv("COLUMNS", "80")
    out = cli("show", key).stdout
    assert f"Labelled {truth[key]} by ana at {doc['at']} (UTC); note: clear case" in out
    assert "label history" in out and "undo-label" in out and "second look" in out
    assert max(len(line) for line in out.splitlines()) <= 80


def test_show_of_an_unlabelled_candidate(reviewed):
    cli, keys, _ = reviewed
    unlabelled = next(f"c{i:03d}" for i in range(200) if f"c{i:03d}" not in keys)
    doc = cli.json("show", unlabelled)
    assert (doc["label"], doc["by"], doc["at"], doc["note"], doc["history"]) == (None,) * 4 + ([],)
    assert "label history" not in cli("show", unlabelled).stdout


# --- undo KEY ------------------------------------------------------------------------------


def current(cli) -> dict:
    return {r["key"]: r["class"] for r in cli.json("labels")}


def test_undo_key_takes_back_a_label_that_is_not_the_latest(reviewed):
    cli, keys, truth = reviewed
    doc = cli.json("undo", keys[1])
    assert doc == {"undone": "label", "key": keys[1], "class": truth[keys[1]]}
    assert current(cli) == {k: truth[k] for k in keys if k != keys[1]}
    result = cli("undo", keys[2])
    assert result.stdout.strip() == f"Took back the label {truth[keys[2]]} on {keys[2]}."


def test_undo_key_takes_back_a_skip(reviewed):
    cli, keys, truth = reviewed
    skipped = next(f"c{i:03d}" for i in range(200) if f"c{i:03d}" not in keys)
    assert cli("skip", skipped).exit_code == 0
    label(cli, keys[0], "malignant" if truth[keys[0]] == "benign" else "benign", "--relabel")
    result = cli("undo", skipped)
    assert result.exit_code == 0 and result.stdout.strip() == f"Took back the skip of {skipped}."
    assert cli.json("status")["skipped"] == 0
    assert [e["kind"] for e in cli.json("show", skipped)["history"]] == ["skip", "undo-skip"]


def test_undo_key_of_a_relabel_brings_back_the_earlier_label(reviewed):
    cli, keys, truth = reviewed
    key = keys[1]
    other = "benign" if truth[key] == "malignant" else "malignant"
    label(cli, key, other, "--relabel")
    label(cli, keys[0], truth[keys[0]], "--relabel")  # the relabel of `key` is no longer the latest
    assert cli.json("undo", key) == {"undone": "label", "key": key, "class": other}
    assert current(cli)[key] == truth[key]


def test_undo_key_with_nothing_to_take_back_changes_nothing(reviewed, user_error):
    cli, keys, _ = reviewed
    unlabelled = next(f"c{i:03d}" for i in range(200) if f"c{i:03d}" not in keys)
    before = cli.dump()
    user_error(cli("undo", unlabelled),
               f"nothing to undo for candidate {unlabelled!r}: it has no label or skip")
    user_error(cli("undo", "no-such-key"), "no-such-key")
    assert cli.dump() == before


# --- label ---------------------------------------------------------------------------------


def test_labelling_twice_names_relabel(reviewed, user_error):
    cli, keys, truth = reviewed
    before = cli.dump()
    # the same labeller (ana) labelling again; another labeller would add a second opinion
    # (issue 14, tests/cli/test_teams.py)
    user_error(cli("label", keys[0], "benign", "--by", "ana"),
               f"candidate {keys[0]!r} is already labelled {truth[keys[0]]!r}; use --relabel to "
               f"replace the label")
    assert cli.dump() == before


def test_label_takes_a_class_in_any_case_or_by_number(cancer_store, user_error):
    result = label(cancer_store, "c010", "BENIGN")
    assert result.stdout.splitlines()[0] == "Labelled c010 as benign."
    doc = json.loads(label(cancer_store, "c011", "1", "--json").stdout)
    assert doc["labelled"]["class"] == "malignant"
    label(cancer_store, "c012", "Malignant")
    assert current(cancer_store) == {"c012": "malignant", "c011": "malignant", "c010": "benign"}
    before = cancer_store.dump()
    user_error(cancer_store("label", "c013", "benigh"),
               "unknown class 'benigh'; did you mean 'benign'? (classes: 1 malignant, 2 benign)")
    user_error(cancer_store("label", "c013", "3"), "unknown class '3' (classes: 1 malignant, 2 benign)")
    assert cancer_store.dump() == before


def test_a_class_named_like_a_number_is_matched_by_name_first(cli, cancer_csv):
    assert cli("init", "--classes", "2,1").exit_code == 0
    assert cli("import", cancer_csv, "--id", "key").exit_code == 0
    doc = json.loads(label(cli, "c000", "2", "--json").stdout)
    assert doc["labelled"]["class"] == "2"  # the class named "2", not the second class ("1")
    label(cli, "c001", "1")
    assert current(cli) == {"c001": "1", "c000": "2"}


def test_session_prompt_takes_a_class_in_any_case(cancer_store):
    result = cancer_store("session", "--by", "ana", input="BENIGN\nq\n")
    assert result.exit_code == 0, result.output
    (row,) = cancer_store.json("labels")
    assert (row["class"], row["by"]) == ("benign", "ana")
    assert f"labelled {row['key']} as benign" in result.stdout


# --- export predictions --------------------------------------------------------------------


def test_export_predictions_has_the_labellers_class(reviewed):
    cli, keys, truth = reviewed
    table = predictions(cli)
    assert list(table[0])[:9] == ["key", "predicted", "p_malignant", "p_benign", "p_low", "p_high",
                                  "entropy", "labelled", "label"]
    assert {r["key"]: r["label"] for r in table if r["label"]} == {k: truth[k] for k in keys}
    assert all((r["label"] != "") == (r["labelled"] == "1") for r in table)
    rows = predictions(cli, "--json")
    assert {r["key"]: r["label"] for r in rows if r["label"] is not None} == {k: truth[k] for k in keys}
    assert sum(r["label"] is None for r in rows) == 200 - len(keys)
