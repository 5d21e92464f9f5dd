"""Accuracy with learnt hyperparameters on data bundled with scikit-learn (slow).

Levels are common practice for GP classifiers on these data sets, no published source.
"""
import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_digits, load_iris
from sklearn.model_selection import StratifiedKFold, train_test_split

from labelq.gp import GPClassifier


def _cv_accuracy(X, y, **settings):
    folds = StratifiedKFold(5, shuffle=True, random_state=0).split(X, y)
    return np.mean([(GPClassifier(**settings).fit(X[tr], y[tr]).predict(X[te]) == y[te]).mean()
                    for tr, te in folds])


@pytest.mark.slow
def test_breast_cancer_five_fold():
    # Source: common practice (no published source): >= 0.96 stratified 5-fold accuracy.
    X, y = load_breast_cancer(return_X_y=True)
    assert _cv_accuracy(X, y, ard=False) >= 0.96


@pytest.mark.slow
def test_iris_five_fold_multiclass_ard():
    # Source: common practice (no published source): >= 0.95 on iris (3 classes, softmax).
    X, y = load_iris(return_X_y=True)
    assert _cv_accuracy(X, y) >= 0.95


@pytest.mark.slow
def test_digits_ten_classes_held_out_third():
    # Source: common practice (no published source): >= 0.97 on a held-out third of digits.
    # Hyperparameters are learnt on 300 training rows (non-ARD, 15 L-BFGS-B iterations), then
    # the full training set is fitted with them fixed, warm-started from the subsample's mode:
    # the labelq refit workflow, and 10-class Laplace costs O(C n^3) per Newton step.
    X, y = load_digits(return_X_y=True)
    Xtr, Xte, ytr, yte = train_test_split(X, y, test_size=1 / 3, random_state=0, stratify=y)
    clf = GPClassifier(ard=False, max_optimizer_iter=15).fit(Xtr[:300], ytr[:300])
    clf.optimize = False
    clf.fit(Xtr, ytr, warm_start=True)
    assert (clf.predict(Xte) == yte).mean() >= 0.97
