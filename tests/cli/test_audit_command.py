"""`labelq audit` and the audit in `next`, `status` and `history` (issue 11).

Data: the first 200 rows of scikit-learn's bundled breast-cancer data (conftest); the true class
(`truth` column) answers for the labeller. Figures are checked against the store's own audit
records and the Wilson interval against statsmodels (proportion_confint, method "wilson").
"""

from __future__ import annotations

import pytest
from statsmodels.stats.proportion import proportion_confint


def _label_heads(cli, truth, n):
    for _ in range(n):
        head = cli.json("next", "-n", "1")["queue"][0]
        assert cli("label", head["key"], truth[head["key"]]).exit_code == 0


def test_audit_before_a_model_is_a_user_error_and_changes_nothing(cancer_store, user_error):
    before = cancer_store.dump()
    user_error(cancer_store("audit", "-n", "5"), "no model yet")
    assert cancer_store.dump() == before


def test_audit_end_to_end(cancer_store, cancer_csv, tmp_path):
    truth = cancer_store.truth(cancer_csv)
    _label_heads(cancer_store, truth, 6)
    doc = cancer_store.json("audit", "-n", "8", "--seed", "3")
    assert doc["drawn"] == {"audit": 1, "n": 8, "drawn_from": 194, "seed": 3}
    assert doc["audit"]["n"] == 0 and doc["audit"]["pending"] == 8
    queue = cancer_store.json("next", "-n", "6")["queue"]
    assert [r["audit"] for r in queue] == [True, False, False, False, False, True]
    assert all(r["predicted"] is None and r["p"] is None for r in queue if r["audit"])
    screen = " ".join(cancer_store("next", "-n", "6").stdout.split())
    assert "Rows marked A are audit items" in screen
    _label_heads(cancer_store, truth, 40)  # 8 audit items among them
    status = cancer_store.json("status")
    audit = status["audit"]
    assert set(audit) >= {"n", "accuracy", "low", "high", "expected"}
    assert audit["n"] == 8 and audit["pending"] == 0
    k = round(audit["accuracy"] * 8)
    low, high = proportion_confint(k, 8, alpha=0.05, method="wilson")
    assert (audit["low"], audit["high"]) == (pytest.approx(low, abs=1e-12),
                                             pytest.approx(high, abs=1e-12))
    assert 0 < audit["expected"] <= 1
    screen = " ".join(cancer_store("status").stdout.split())
    assert "Audit (measured):" in screen and "on 8 random items" in screen
    report = cancer_store("audit")
    assert report.exit_code == 0, report.output
    assert "Reliability: 8 items" in report.stdout
    assert "expected calibration error (ECE)" in report.stdout
    assert all(len(line) <= 80 for line in report.stdout.splitlines())
    rows = cancer_store.json("history", "--by", "fit")
    assert rows[-1]["audit"]["n"] == 8 and rows[0]["audit"]["n"] == 0
    png = tmp_path / "reliability.png"
    assert cancer_store("audit", "--plot", png).exit_code == 0
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_plot_before_any_scored_item_is_a_user_error(cancer_store, cancer_csv, tmp_path,
                                                      user_error):
    truth = cancer_store.truth(cancer_csv)
    _label_heads(cancer_store, truth, 6)
    assert cancer_store("audit", "-n", "3", "--seed", "1").exit_code == 0
    user_error(cancer_store("audit", "--plot", tmp_path / "r.png"), "no audit item is scored")
    assert not (tmp_path / "r.png").exists()
