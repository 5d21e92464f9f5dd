"""`labelq check` finds damaged derived data; `labelq rebuild` remakes every fit, score and snapshot
from the label events alone, equal to the stored ones; keys and class names that look like SQL or
markup are stored and shown verbatim.

Data: scikit-learn's bundled breast-cancer data (569 rows, true classes) and iris data.
"""

from __future__ import annotations

import csv
import io
import json

import pytest

N_LABELS = 20
SNAPSHOT_FIELDS = ("mean_entropy", "n_uncertain", "expected_accuracy", "kappa")


@pytest.fixture
def history_store(cancer_cli):
    """About 20 labels given one by one with `labelq label` (breast-cancer rows in order, true
    classes), with one skip and one undo on the way."""
    cli = cancer_cli
    keys = iter(cli.truth)
    given = 0
    while given < N_LABELS:
        key = next(keys)
        if key == "c0006":  # one skip
            assert cli("skip", key).exit_code == 0
            continue
        result = cli("label", key, cli.truth[key])
        assert result.exit_code == 0, result.output
        given += 1
        if key == "c0012":  # one undo: the label on c0012 is retracted for good
            assert cli.json("undo")["key"] == key
            given -= 1
    assert cli.json("status")["labelled"] == N_LABELS
    return cli


def _history(cli):
    rows = cli.json("history")
    assert rows
    return rows


def test_check_passes_on_a_healthy_store(history_store):
    """A store built only through the command line has no problems; common practice."""
    result = history_store("check")
    assert result.exit_code == 0, result.output
    assert history_store.json("check") == {"ok": True, "problems": []}


@pytest.mark.slow
def test_rebuild_remakes_snapshots_equal_to_the_stored_ones(history_store):
    """Acceptance check "Snapshots can be rebuilt from the label events alone and equal the stored
    ones" (DESIGN.md: model state is derived); common practice, no published source."""
    cli = history_store
    before = _history(cli)
    fits_before = cli.counts()["fits"]
    labels_before = cli("export", "labels").stdout
    assert any(r["kappa"] is not None for r in before)
    result = cli.json("rebuild")
    assert result["fits"] == fits_before
    after = _history(cli)
    assert cli.counts()["fits"] == fits_before
    assert len(after) == len(before)
    for old, new in zip(before, after):
        assert old["n_labels"] == new["n_labels"]
        for field in SNAPSHOT_FIELDS:
            if old[field] is None:
                assert new[field] is None, (field, old, new)
            else:
                assert new[field] == pytest.approx(old[field], abs=1e-9), (field, old, new)
    assert cli("export", "labels").stdout == labels_before
    assert cli("check").exit_code == 0


def test_an_interrupted_rebuild_loses_nothing(history_store):
    """A rebuild stopped half way (here by an exception from its progress callback) leaves the
    old fits in place; the next rebuild drops the partial ones and remakes the same snapshots.
    Common practice (write the new, then drop the old), no published source."""
    from labelq.loop.maintain import rebuild
    from labelq.store import Store

    cli = history_store
    before = _history(cli)

    class Stop(Exception):
        pass

    def stop_after_three(stage, done, total):
        if done == 3:
            raise Stop

    with Store.open(cli.db) as store:
        with pytest.raises(Stop):
            rebuild(store, progress=stop_after_three)
    assert cli.json("rebuild")["fits"] == len(before)
    after = _history(cli)
    assert len(after) == len(before)
    for old, new in zip(before, after):
        for field in SNAPSHOT_FIELDS:
            if old[field] is None:
                assert new[field] is None
            else:
                assert new[field] == pytest.approx(old[field], abs=1e-9), (field, old, new)
    assert cli("check").exit_code == 0


@pytest.mark.slow
def test_check_finds_a_score_row_of_an_older_fit_and_rebuild_repairs_it(history_store, sql):
    """A score row inserted for an older fit id (sqlite3) is reported, exit 1; `rebuild` makes the
    store consistent again; common practice."""
    cli = history_store
    _, execute = sql
    before = _history(cli)
    execute(cli.db, "INSERT INTO scores (candidate_id, fit_id, probabilities, predicted, p_top,"
                    " p_low, p_high, entropy, margin, bald, priority, rank)"
                    " SELECT candidate_id, (SELECT MIN(id) FROM fits), probabilities, predicted,"
                    " p_top, p_low, p_high, entropy, margin, bald, priority, rank FROM scores"
                    " ORDER BY candidate_id LIMIT 1")
    result = cli("check")
    assert result.exit_code == 1, result.output
    assert "problem" in result.stdout and "score" in result.stdout
    doc = json.loads(cli("check", "--json").stdout)
    assert doc["ok"] is False and doc["problems"]
    assert cli("rebuild").exit_code == 0
    assert cli("check").exit_code == 0
    after = _history(cli)
    assert [r["mean_entropy"] for r in after] == pytest.approx([r["mean_entropy"] for r in before],
                                                               abs=1e-9)


def _damage_block(sql, db, table, where="1 = 1"):
    """Flip one byte in the middle of the first block of ``table`` (sqlite3), as a bad disk
    sector or a stray write would."""
    query, execute = sql
    rowid, blob = query(db, f"SELECT rowid, data FROM {table} WHERE {where} ORDER BY rowid LIMIT 1")[0]
    data = bytearray(blob)
    data[len(data) // 2] ^= 0xFF
    execute(db, f"UPDATE {table} SET data = ? WHERE rowid = ?", (bytes(data), rowid))


def test_check_finds_a_missing_score_block(history_store, sql):
    """The last fit's score block deleted (sqlite3): the fit no longer scores the whole pool,
    which check must report with exit 1; common practice."""
    cli = history_store
    _, execute = sql
    execute(cli.db, "DELETE FROM score_blocks")
    result = cli("check")
    assert result.exit_code == 1, result.output
    assert "569 candidates have no score under the last fit" in result.stdout


@pytest.mark.slow
def test_check_finds_a_corrupted_score_block_and_rebuild_repairs_it(history_store, sql):
    """Issue 13's acceptance: a score block with one byte flipped fails its CRC-32; `check`
    names it (exit 1), a command that reads it says so in one line (exit 2, no traceback),
    and `rebuild` remakes it from the label events with the same snapshots; common practice."""
    cli = history_store
    before = _history(cli)
    _damage_block(sql, cli.db, "score_blocks")
    result = cli("check")
    assert result.exit_code == 1, result.output
    assert "score block 0 of the last fit is damaged" in result.stdout
    export = cli("export", "predictions")
    assert export.exit_code == 2 and "Traceback" not in export.output
    assert "score block 0" in export.stderr and len(export.stderr.strip().splitlines()) == 1
    assert cli("rebuild").exit_code == 0
    assert cli("check").exit_code == 0
    assert cli("export", "predictions").exit_code == 0
    after = _history(cli)
    for old, new in zip(before, after):
        assert new["expected_accuracy"] == pytest.approx(old["expected_accuracy"], abs=1e-9)


def test_check_finds_a_corrupted_feature_block(history_store, sql):
    """A feature block with one byte flipped: `check` reports it as primary data that a rebuild
    cannot remake (restore or import again), exit 1; common practice."""
    cli = history_store
    _damage_block(sql, cli.db, "feature_blocks")
    result = cli("check")
    assert result.exit_code == 1, result.output
    assert "feature block" in result.stdout and "restore" in result.stdout


# --- keys and class names that look like SQL or markup ------------------------------------------

ODD_CLASSES = ["'; DROP TABLE candidates;--", "<b>x</b>", "[red]x[/red]"]
ODD_KEYS = {0: "'; DROP TABLE candidates;--", 50: "<b>x</b>", 100: "[red]x[/red]",
            1: "[bold]k[/bold]", 51: "Robert'); DROP TABLE label_events;--"}


@pytest.fixture
def odd_store(cli, iris, tmp_path):
    """The iris rows under keys and species names that look like SQL or markup (the three species
    renamed to ODD_CLASSES, five keys from ODD_KEYS), a metadata column of markup, six labels."""
    path = tmp_path / "odd.csv"
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["key", "note", "sl", "sw", "pl", "pw"])
        for i, x in enumerate(iris.data):
            w.writerow([ODD_KEYS.get(i, f"c{i:04d}"), "[i]<i>m</i>[/i]", *map(repr, x.tolist())])
    result = cli("init", "--classes", ",".join(ODD_CLASSES))
    assert result.exit_code == 0, result.output
    assert cli("import", path, "--id", "key").exit_code == 0
    cli.names = {i: ODD_CLASSES[t] for i, t in enumerate(iris.target)}
    for i in (0, 50, 100, 2, 52):
        key = ODD_KEYS.get(i, f"c{i:04d}")
        result = cli("label", key, cli.names[i])
        assert result.exit_code == 0, result.output
    assert cli.counts()["candidates"] == 150
    return cli


def test_odd_names_are_stored_verbatim(odd_store, sql):
    """The store holds the keys and classes byte for byte (bound parameters, not SQL text); every
    table still exists; common practice (OWASP: query parameterisation)."""
    query, _ = sql
    keys = {k for (k,) in query(odd_store.db, "SELECT key FROM candidates")}
    assert set(ODD_KEYS.values()) <= keys
    assert [c for (c,) in query(odd_store.db, "SELECT name FROM classes ORDER BY position")] == \
        ODD_CLASSES
    assert odd_store("check").exit_code == 0


def test_odd_names_in_json_and_export(odd_store):
    """`next --json`, `show --json`, `status --json` and `export labels` print them verbatim;
    common practice."""
    cli = odd_store
    queue = cli.json("next", "-n", "150")["queue"]
    shown = {r["key"] for r in queue}
    assert {ODD_KEYS[1], ODD_KEYS[51]} <= shown
    for row in queue:
        assert set(row["p"]) == set(ODD_CLASSES) and row["predicted"] in ODD_CLASSES
        assert row["meta"] == {"note": "[i]<i>m</i>[/i]"}
    view = cli.json("show", ODD_KEYS[100])
    assert view["key"] == ODD_KEYS[100] and view["label"] == ODD_CLASSES[2]
    assert set(view["p"]) == set(ODD_CLASSES)
    assert set(cli.json("status")["classes"]) == set(ODD_CLASSES)
    rows = list(csv.DictReader(io.StringIO(cli("export", "labels").stdout)))
    got = {r["key"]: r["class"] for r in rows}
    for i in (0, 50, 100):
        assert got[ODD_KEYS[i]] == ODD_CLASSES[[0, 1, 2][i // 50]]
    as_json = json.loads(cli("export", "labels", "--json").stdout)
    assert {r["key"] for r in as_json} == set(got)


def test_odd_names_in_the_next_table(odd_store):
    """The `next` table prints keys, predicted classes and metadata as given; common practice."""
    out = odd_store("next", "-n", "150").stdout
    assert ODD_KEYS[1] in out and ODD_KEYS[51] in out
    assert "[i]<i>m</i>[/i]" in out
    assert any(c in out for c in ODD_CLASSES[1:])  # at least one bracketed prediction shown


def test_odd_names_in_the_show_table(odd_store):
    """`show KEY` prints the key, its label, class names and metadata as given; common practice."""
    out = odd_store("show", ODD_KEYS[100]).stdout
    assert ODD_KEYS[100] in out and ODD_CLASSES[2] in out
    assert "[i]<i>m</i>[/i]" in out
    for c in ODD_CLASSES:
        assert c in out, c


def test_odd_names_in_plain_tables_without_brackets(odd_store):
    """Keys and classes without square brackets ("'; DROP TABLE candidates;--", "<b>x</b>") are
    shown as given by `show` and `next`; common practice."""
    cli = odd_store
    out = cli("show", ODD_KEYS[0]).stdout
    assert ODD_KEYS[0] in out
    out = cli("show", ODD_KEYS[50]).stdout
    assert ODD_KEYS[50] in out and "<b>x</b>" in out
    out = cli("next", "-n", "150").stdout
    assert ODD_KEYS[51] in out
