"""Two labellers on one store (issue 14): disputes listed, left out of training and settled;
a double-labelled audit reported as Cohen's kappa with its interval; labels per labeller.

Data: the first 200 rows of scikit-learn's bundled breast-cancer data (conftest); the true class
answers for the first labeller, the other class for the second on one item (a made-up slip).
Kappa's interval is labelq.review.kappa.kappa_interval, itself checked by hand and against
statsmodels (tests/review/test_kappa.py).
"""

from __future__ import annotations

import pytest

from labelq.review.kappa import kappa_interval


def _label_heads(cli, truth, n, by):
    for _ in range(n):
        head = cli.json("next", "-n", "1", "--by", by)["queue"][0]
        assert cli("label", head["key"], truth[head["key"]], "--by", by).exit_code == 0


def test_disputes_and_double_labels(cancer_store, cancer_csv, user_error):
    truth = cancer_store.truth(cancer_csv)
    _label_heads(cancer_store, truth, 6, "ann")
    assert cancer_store("audit", "-n", "3", "--seed", "4", "--double", "--by", "ann").exit_code == 0
    _label_heads(cancer_store, truth, 3, "ann")  # ann's head is the first audit item
    by_ann = {r["key"] for r in cancer_store.json("labels", "--by", "ann")}
    queue = cancer_store.json("next", "-n", "15", "--by", "bob")["queue"]
    # the audit item ann labelled waits for a second labeller: it is offered to bob, not to ann
    bob_head = next(r for r in queue if r["audit"] and r["key"] in by_ann)
    assert not any(r["key"] == bob_head["key"]
                   for r in cancer_store.json("next", "-n", "15", "--by", "ann")["queue"])
    other = "benign" if truth[bob_head["key"]] == "malignant" else "malignant"
    result = cancer_store("label", bob_head["key"], other, "--by", "bob")
    assert result.exit_code == 0, result.output
    assert "is now disputed" in " ".join(result.stdout.split())
    disputes = cancer_store.json("disputes")
    assert [d["key"] for d in disputes] == [bob_head["key"]]
    assert (disputes[0]["first"]["by"], disputes[0]["second"]["by"]) == ("ann", "bob")
    status = cancer_store.json("status")
    assert status["disputes"] == 1
    labelled = {r["key"] for r in cancer_store.json("labels")}
    assert bob_head["key"] not in labelled  # out of training and of the current labels
    agreement = status["agreement"]
    kappa, se, low, high = kappa_interval([truth[bob_head["key"]]], [other])
    assert agreement["n"] == 1 and agreement["kappa"] == pytest.approx(kappa)
    assert agreement["labellers"] == ["ann/bob"]
    assert status["labellers"] == {"ann": 8}  # the disputed item counts for nobody
    before = cancer_store.dump()
    user_error(cancer_store("label", bob_head["key"], other, "--by", "cy"), "--resolve")
    assert cancer_store.dump() == before
    settled = cancer_store("label", bob_head["key"], truth[bob_head["key"]], "--resolve",
                           "--by", "cy")
    assert settled.exit_code == 0, settled.output
    assert cancer_store.json("disputes") == []
    assert cancer_store.json("status")["labellers"] == {"ann": 8, "cy": 1}
