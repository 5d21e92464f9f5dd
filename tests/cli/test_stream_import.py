"""A large import streams into the store part by part (issue 13, item 5), and stays all or nothing.

Data: scikit-learn's make_classification (a generator of the reference library), written as a
CSV here; the parts must equal what reading the whole file gives (labelq.ingest.read_candidates,
the path every earlier import took). "Nothing changed" after a refused file is checked by
comparing the whole store before and after (common practice).
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.datasets import make_classification

from labelq.ingest import read_candidates, stream_candidates
from labelq.store.columns import BLOCK_ROWS

from .test_import_safety import stored_features


def _write(path, X, labels=None, meta=None, blank=None, bad=None, prefix="k"):
    """key, [note], x0..x(d-1), [truth]; ``blank``/``bad`` (row, column) make one empty or
    non-numeric feature cell."""
    header = ["key"] + (["note"] if meta is not None else []) + [f"x{j}" for j in range(X.shape[1])]
    header += ["truth"] if labels is not None else []
    lines = [",".join(header)]
    for i, row in enumerate(X):
        cells = [repr(float(v)) for v in row]
        if blank is not None and blank[0] == i:
            cells[blank[1]] = ""
        if bad is not None and bad[0] == i:
            cells[bad[1]] = "n/a"
        extra = [meta[i]] if meta is not None else []
        tail = [labels[i] or ""] if labels is not None else []
        lines.append(",".join([f"{prefix}{i:06d}", *extra, *cells, *tail]))
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


@pytest.mark.parametrize("missing", ["error", "drop-row", "median"])
def test_streamed_parts_equal_the_whole_file(tmp_path, missing):
    """Parts of 7 rows, concatenated, give the same keys, features, metadata, labels and
    empty-cell summary as reading the whole file; several parts come before the end except
    under "median", which needs the whole file."""
    X, y = make_classification(n_samples=60, n_features=4, random_state=1)
    labels = [("yes" if t else "no") if i % 9 == 0 else None for i, t in enumerate(y)]
    meta = [f"bin {i % 5}" for i in range(60)]
    blank = None if missing == "error" else (23, 2)
    path = _write(tmp_path / "pool.csv", X, labels, meta, blank=blank)
    whole = read_candidates(path, "key", labels_column="truth", missing=missing, chunk_rows=7)
    parts = list(stream_candidates(path, "key", labels_column="truth", missing=missing,
                                   chunk_rows=7))
    # 8 parts of 7 rows, the last 4 rows, and the closing summary; "median" holds the whole file
    assert len(parts) == (1 if missing == "median" else 10)
    assert [k for p in parts for k in p.keys] == whole.keys
    np.testing.assert_array_equal(np.concatenate([p.X for p in parts]), whole.X)
    assert [m for p in parts for m in p.meta] == whole.meta
    assert [v for p in parts for v in p.labels] == whole.labels
    assert parts[-1].missing == whole.missing
    assert parts[-1].feature_names == whole.feature_names


def test_a_file_of_several_blocks_imports_whole(cli, tmp_path):
    """40,000 rows (two parts, two feature blocks): every row's features stored exactly, the
    labels recorded, `check` clean."""
    X, y = make_classification(n_samples=40_000, n_features=3, n_informative=2, n_redundant=0,
                               random_state=2)
    labels = [("yes" if t else "no") if i < 30 else None for i, t in enumerate(y)]
    path = _write(tmp_path / "big.csv", X, labels)
    assert cli("init", "--classes", "no,yes").exit_code == 0
    result = cli("import", str(path), "--id", "key", "--labels", "truth")
    assert result.exit_code == 0, result.output
    assert cli.counts()["candidates"] == 40_000
    assert cli.counts()["feature_blocks"] == -(-40_000 // BLOCK_ROWS)
    assert cli.counts()["label_events"] == 30
    stored = stored_features(cli)
    for i in (0, 1, BLOCK_ROWS - 1, BLOCK_ROWS, 39_999):
        assert stored[f"k{i:06d}"] == X[i].tolist()
    assert cli("check").exit_code == 0


def test_a_bad_cell_after_the_first_parts_changes_nothing(cli, tmp_path):
    """A non-numeric cell on the file's last line, read after a full part went into the open
    transaction: one line naming file, line, column and value, exit 2, and the store exactly
    as before (DESIGN.md's contract for bad input)."""
    X, _ = make_classification(n_samples=BLOCK_ROWS + 10, n_features=3, n_informative=2,
                               n_redundant=0, random_state=3)
    assert cli("init", "--classes", "no,yes").exit_code == 0
    first = _write(tmp_path / "first.csv", X[:5], prefix="old")
    assert cli("import", str(first), "--id", "key").exit_code == 0
    before = cli.dump()
    last = len(X) - 1
    path = _write(tmp_path / "late.csv", X, bad=(last, 1))
    result = cli("import", str(path), "--id", "key")
    assert result.exit_code == 2
    assert result.stderr.strip() == (
        f'labelq: {path}, line {last + 2}, column "x1": "n/a" is not a number in a feature column '
        '(its first filled cell, line 2, is a number; use --meta x1 to keep the column as text)')
    assert cli.dump() == before
