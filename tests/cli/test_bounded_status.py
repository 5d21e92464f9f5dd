"""What the screen says when a large pool's figures are estimates from the seeded sample
(issue 13: "summarised from a fixed seeded sample with its standard error, and said so").

Data: the first 569 rows of scikit-learn's breast-cancer data (true classes); bounded scoring is
switched on for every pool size and the sample cut to 200 so that this small pool exercises it.
"""
from __future__ import annotations

import pytest

from labelq.loop import settings


@pytest.mark.sqlite_only("the same screens on both back ends; the figures are the loop's")
def test_status_and_history_say_the_figures_come_from_the_sample(cli, full_cancer_csv,
                                                                   monkeypatch):
    monkeypatch.setattr(settings, "EXACT_POOL_UP_TO", 0)
    monkeypatch.setattr(settings, "SUMMARY_SAMPLE", 200)
    monkeypatch.setattr(settings, "EXACT_HEAD", 300)
    assert cli("init", "--classes", "malignant,benign").exit_code == 0
    assert cli("import", full_cancer_csv, "--id", "key", "--meta", "site,truth").exit_code == 0
    for key, cls in [("c000", "malignant"), ("c019", "benign"), ("c001", "malignant"),
                     ("c020", "benign"), ("c002", "malignant"), ("c021", "benign")]:
        assert cli("label", key, cls).exit_code == 0
    doc = cli.json("status")
    sample = doc["snapshot"]["sample"]
    assert sample["of"] == 569 - 6 and 190 <= sample["rows"] <= 200
    assert set(sample["se"]) >= {"mean_entropy", "expected_accuracy", "n_uncertain"}
    screen = cli("status").stdout
    assert f"fixed seeded sample of {sample['rows']:,} of {sample['of']:,}" in screen
    assert "+-" in screen and "export predictions" in screen
    history = cli("history", "--by", "fit").stdout
    assert "fixed seeded sample" in history
