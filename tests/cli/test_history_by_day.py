"""`history --by day|session|fit` on stores whose events were stamped on set days.

Data: scikit-learn's bundled breast-cancer rows (conftest); the true classes answer for the
labeller. Events are stamped through the settable clock (``LABELQ_NOW``, labelq.store.timestamps).
Expected counts are hand computations; the sitting rule is common practice (a pause of 30
minutes or more ends a sitting); zone offsets as in tests/review/test_grouping.py (IANA tz
database: ``Etc/GMT-2`` is UTC+2 all year, ``Europe/Helsinki`` UTC+2 in December).
"""

from __future__ import annotations

import json
import struct

import pytest

from labelq.cli.app import app

GROUP_KEYS = {"group", "by", "start", "end", "labels_given", "labels_total", "mean_entropy",
              "entropy_change", "n_uncertain", "expected_accuracy", "relearnt", "fits", "audit",
              "sample"}


def at(cli, when, *args, env=None):
    """Run `labelq ARGS` on the store with the clock set to ``when`` (UTC)."""
    return cli.runner.invoke(app, [*map(str, args), "--db", str(cli.db)],
                             env={"LABELQ_NOW": when, **(env or {})})


def ok(result):
    assert result.exit_code == 0, (result.output, result.exception)
    return result


def history_json(cli, *args, env=None):
    result = ok(cli.runner.invoke(app, ["history", *map(str, args), "--json", "--db",
                                        str(cli.db)], env=env))
    return json.loads(result.stdout)


@pytest.fixture
def five_days(cancer_store, cancer_csv):
    """Labels on five days of December 2026, with two undos (hand-built plan):
    day 1: c000, c001 | day 2: c002, c003 | day 3: c004, c005, c006, undo (c006 retracted) |
    day 4: c007, c008 | day 5: undo (c008, given on day 4, retracted), c009, c010."""
    truth = cancer_store.truth(cancer_csv)
    plan = {1: ["c000", "c001"], 2: ["c002", "c003"], 3: ["c004", "c005", "c006", "undo"],
            4: ["c007", "c008"], 5: ["undo", "c009", "c010"]}
    for day, steps in plan.items():
        for minute, step in enumerate(steps):
            when = f"2026-12-0{day}T10:{minute * 5:02d}:00Z"
            args = ["undo"] if step == "undo" else ["label", step, truth[step]]
            ok(at(cancer_store, when, *args, "--by", "ana"))
    return cancer_store


def test_five_days_give_five_rows_whose_labels_add_up(five_days):
    """Labels given per day, net of undos: 2, 2, 2 (c006 undone the same day), 1 (c008 undone
    on day 5), 2 = 9 labels standing; totals as they stood at each day's end: 2, 4, 6, 8, 9."""
    cli = five_days
    doc = history_json(cli, "--by", "day", "--tz", "Etc/UTC")
    assert doc["by"] == "day" and doc["time_zone"] == "Etc/UTC"
    rows = doc["rows"]
    assert [r["group"] for r in rows] == [f"2026-12-0{d}" for d in range(1, 6)]
    assert [r["labels_given"] for r in rows] == [2, 2, 2, 1, 2]
    assert sum(r["labels_given"] for r in rows) == cli.json("status")["labelled"] == 9
    assert [r["labels_total"] for r in rows] == [2, 4, 6, 8, 9]
    for r in rows:
        assert set(r) == GROUP_KEYS
        assert r["by"] is None and r["fits"]
        assert r["start"].startswith(r["group"]) and r["start"].endswith("+00:00")
    assert rows[0]["entropy_change"] is None
    for before, row in zip(rows, rows[1:]):
        assert row["entropy_change"] == pytest.approx(row["mean_entropy"] - before["mean_entropy"])
    per_fit = {r["fit"]: r for r in history_json(cli, "--by", "fit")}
    for r in rows:  # the day's figures are those of its last fit
        last = per_fit[r["fits"][-1]]
        assert (r["mean_entropy"], r["n_uncertain"], r["expected_accuracy"]) == (
            last["mean_entropy"], last["n_uncertain"], last["expected_accuracy"])
        assert r["relearnt"] == any(per_fit[f]["relearnt"] for f in r["fits"])


def test_the_clock_stamps_events_and_the_default_grouping_follows_the_days(five_days):
    """LABELQ_NOW stamps the label events; with labels on five days, `history` groups by day
    unless told otherwise, and `--by fit` keeps the per-fit list (DESIGN.md keys)."""
    cli = five_days
    stamps = sorted(r["at"] for r in cli.json("export", "labels"))
    assert stamps[0] == "2026-12-01T10:00:00Z" and stamps[-1] == "2026-12-05T10:10:00Z"
    assert history_json(cli, env={"TZ": "Etc/UTC"})["by"] == "day"
    fits = history_json(cli, "--by", "fit")
    assert isinstance(fits, list) and len(fits) >= 13
    for r in fits:
        assert set(r) >= {"fit", "session", "n_labels", "mean_entropy", "n_uncertain",
                          "expected_accuracy", "kappa", "at", "hyper_mode", "relearnt",
                          "accuracy_change"}


def test_day_table_and_chart_fit_80_columns_without_colour(five_days, tmp_path, monkeypatch):
    """Grouped table, legend and charts within 80 columns and free of escape codes under
    NO_COLOR; the PNG is a PNG of a sensible size (signature and IHDR chunk as the PNG
    specification lays them out)."""
    monkeypatch.setenv("NO_COLOR", "1")
    monkeypatch.setenv("COLUMNS", "80")
    png = tmp_path / "days.png"
    result = ok(five_days("history", "--tz", "Europe/Helsinki", "--plot", png))
    out = result.stdout
    lines = out.splitlines()
    assert all(len(line) <= 80 for line in lines), max(lines, key=len)
    assert "\x1b[" not in out
    assert "History by day, times in Europe/Helsinki: 5 days, 9 labels standing." in out
    assert "mean entropy (bits) by day" in out and "expected accuracy by day" in out
    assert "kappa: -" in out
    day_rows = [line.split() for line in lines if line[:3].strip().isdigit()
                and "2026-12-0" in line]
    assert [row[1].rstrip("*") for row in day_rows] == [f"2026-12-0{d}" for d in range(1, 6)]
    assert [row[2] for row in day_rows] == ["2", "2", "2", "1", "2"]
    data = png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"
    width, height = struct.unpack(">II", data[16:24])
    assert 600 <= width <= 2000 and 400 <= height <= 2000, (width, height)


def test_a_label_at_23_30_utc_is_counted_on_the_next_day_at_utc_plus_2(cancer_store, cancer_csv):
    """Three labels at 21:59 and 23:30 UTC on 1 December and 10:00 UTC on 2 December: two days
    in UTC (2 + 1 labels); at UTC+2 the 23:30 label is 01:30 on 2 December (1 + 2 labels).
    $TZ is honoured as --tz is; labels on one local day make `history` list fits by default."""
    truth = cancer_store.truth(cancer_csv)
    for key, when in [("c000", "2026-12-01T21:59:00Z"), ("c001", "2026-12-01T23:30:00Z"),
                      ("c002", "2026-12-02T10:00:00Z")]:
        ok(at(cancer_store, when, "label", key, truth[key]))

    def given(doc):
        return [(r["group"], r["labels_given"]) for r in doc["rows"]]

    assert given(history_json(cancer_store, "--by", "day", "--tz", "Etc/UTC")) == [
        ("2026-12-01", 2), ("2026-12-02", 1)]
    for zone in ("Etc/GMT-2", "Europe/Helsinki"):
        doc = history_json(cancer_store, "--by", "day", "--tz", zone)
        assert doc["time_zone"] == zone
        assert given(doc) == [("2026-12-01", 1), ("2026-12-02", 2)]
        assert doc["rows"][1]["start"] == "2026-12-02T01:30:00+02:00"
    from_env = history_json(cancer_store, "--by", "day", env={"TZ": "Etc/GMT-2"})
    assert from_env["time_zone"] == "Etc/GMT-2" and given(from_env) == given(doc)
    # at UTC-12 (Etc/GMT+12) all three fall on 1 December (09:59, 11:30, 22:00): one day, so
    # `history` lists fits by default; over two days it groups by day
    assert isinstance(history_json(cancer_store, env={"TZ": "Etc/GMT+12"}), list)
    assert history_json(cancer_store, env={"TZ": "Etc/GMT-2"})["by"] == "day"


def test_sittings_split_at_pauses_of_30_minutes_or_more(cancer_store, cancer_csv, monkeypatch):
    """Labels at 09:00, 09:10, 09:39, 10:10 and 12:10 UTC (gaps of 10, 29, 31 and 120 minutes)
    by one labeller: sittings of 3, 1 and 1 labels (hand computation); another labeller's label
    at 09:20 is a sitting of its own and brings in the `by` column."""
    truth = cancer_store.truth(cancer_csv)
    for key, when in [("c000", "09:00"), ("c001", "09:10"), ("c002", "09:39"),
                      ("c003", "10:10"), ("c004", "12:10")]:
        ok(at(cancer_store, f"2026-12-01T{when}:00Z", "label", key, truth[key], "--by", "ana"))
    doc = history_json(cancer_store, "--by", "session", "--tz", "Etc/UTC")
    assert doc["by"] == "session"
    assert [(r["group"], r["by"], r["labels_given"], r["labels_total"]) for r in doc["rows"]] == [
        ("2026-12-01 09:00", "ana", 3, 3), ("2026-12-01 10:10", "ana", 1, 4),
        ("2026-12-01 12:10", "ana", 1, 5)]
    assert doc["rows"][0]["end"] == "2026-12-01T09:39:00+00:00"

    ok(at(cancer_store, "2026-12-01T09:20:00Z", "label", "c005", truth["c005"], "--by", "bo"))
    rows = history_json(cancer_store, "--by", "session", "--tz", "Etc/UTC")["rows"]
    assert [(r["group"][11:], r["by"], r["labels_given"]) for r in rows] == [
        ("09:00", "ana", 3), ("09:20", "bo", 1), ("10:10", "ana", 1), ("12:10", "ana", 1)]
    monkeypatch.setenv("NO_COLOR", "1")
    monkeypatch.setenv("COLUMNS", "80")
    out = ok(cancer_store("history", "--by", "session", "--tz", "Etc/UTC")).stdout
    assert all(len(line) <= 80 for line in out.splitlines())
    assert "4 sittings, 6 labels standing" in out
    header = next(line for line in out.splitlines() if line.lstrip().startswith("#"))
    assert header.split()[:3] == ["#", "sitting", "by"]
    assert "under 30 minutes apart" in out


@pytest.mark.sqlite_only("touches no store")
def test_help_states_the_sitting_rule(cli):
    result = cli.runner.invoke(app, ["history", "--help"], env={"COLUMNS": "100"})
    assert result.exit_code == 0
    text = " ".join(result.stdout.split())
    assert "less than 30 minutes after the one before" in text
    assert "--tz" in text and "fit|session|day" in text


def test_bad_grouping_zone_or_clock_is_one_line_and_changes_nothing(cancer_store, user_error):
    before = cancer_store.dump()
    user_error(cancer_store("history", "--by", "week"), "week", "fit, session, day")
    user_error(cancer_store("history", "--tz", "Mars/Olympus"), "Mars/Olympus")
    user_error(at(cancer_store, "yesterday", "label", "c000", "malignant"), "LABELQ_NOW",
               "yesterday")
    assert cancer_store.dump() == before


def test_an_empty_history_says_so(cancer_store):
    """No label yet: a sentence, an empty grouped document, a per-fit empty list."""
    out = ok(cancer_store("history", "--by", "day")).stdout
    assert out.strip().startswith("No labels yet")
    assert history_json(cancer_store, "--by", "day")["rows"] == []
    assert history_json(cancer_store) == []
