"""Check the copied reference data against its provenance record.

Expected shapes, class counts and missing cells are those of the reference-data table
copied into tests/data/PROVENANCE.md (UCI data sets as distributed in Debian's
r-cran-mlbench 2.1-3-1); the checksums were taken when the files were copied.
"""

from __future__ import annotations

import csv
import hashlib
from collections import Counter

import numpy as np
import pytest
from refdata import DATA_DIR, TABLES, load_table, published, published_record

SHA256 = {
    "sonar.csv": "881da0ae2519d66e81755c65c993bee20e4a693e006d8fd156de5add7b455836",
    "ionosphere.csv": (
        "023e3073056ee9608b844c52629ef7b1dff29d6de5d980121f8f7f616ed15eb5"
    ),
    "glass.csv": "edb229afdcb096cb6f65403b185ddc70b698d859938e6a17533a57d985bbcae2",
    "breastcancer.csv": (
        "855625dcc0cbf6770868b53db0fde62c4cde2d6745128a299ff7f19600247d0c"
    ),
    "pimaindiansdiabetes.csv": (
        "c264f9af0e268e237949109bef67fd0f7d67b0b4d8cc18bcb2cb7fc69acb40ac"
    ),
    "published_values.csv": (
        "e0c920b5f93a74c219575911cec6e68cbbe672f1d762ce8601667addd32f0ab3"
    ),
}

# name: (rows, columns including `class`, class counts, missing cells per column)
TABLE_FACTS = {
    "sonar": (208, 61, {"M": 111, "R": 97}, {}),
    "ionosphere": (351, 35, {"good": 225, "bad": 126}, {}),
    # Class counts per glass type: UCI glass.names class distribution (from memory);
    # the provenance table states "6 classes (no class 4)".
    "glass": (214, 10, {"1": 70, "2": 76, "3": 17, "5": 13, "6": 9, "7": 29}, {}),
    "breastcancer": (699, 10, {"benign": 458, "malignant": 241}, {"Bare.nuclei": 16}),
    "pimaindiansdiabetes": (768, 9, {"neg": 500, "pos": 268}, {}),
}


class TestFiles:
    @pytest.mark.parametrize("filename", sorted(SHA256))
    def test_checksum(self, filename):
        digest = hashlib.sha256((DATA_DIR / filename).read_bytes()).hexdigest()
        assert digest == SHA256[filename]

    @pytest.mark.parametrize("filename", sorted(SHA256))
    def test_checksum_is_recorded_in_provenance(self, filename):
        provenance = (DATA_DIR / "PROVENANCE.md").read_text(encoding="utf-8")
        assert f"| {filename} | {SHA256[filename]} |" in provenance


class TestLoadTable:
    def test_validation(self):
        with pytest.raises(ValueError, match=r"`name` must be one of breastcancer, "):
            load_table("sonar.csv")

    @pytest.mark.parametrize("name", TABLES)
    def test_shape_classes_and_missing_cells(self, name):
        rows, columns, class_counts, missing = TABLE_FACTS[name]
        X, y, names = load_table(name)
        assert X.dtype == np.float64 and X.shape == (rows, columns - 1)
        assert y.shape == (rows,) and len(names) == columns - 1
        assert dict(Counter(y.tolist())) == class_counts
        missing_per_column = dict(zip(names, np.isnan(X).sum(axis=0).tolist()))
        assert {k: v for k, v in missing_per_column.items() if v} == missing

    def test_ionosphere_notes(self):
        X, _, names = load_table("ionosphere")
        assert names[:2] == ["V1", "V2"]
        assert set(np.unique(X[:, 0]).tolist()) == {0.0, 1.0}
        assert (X[:, 1] == 0).all()

    def test_breastcancer_notes(self):
        X, y, _ = load_table("breastcancer")
        grades = X[~np.isnan(X)]
        assert set(np.unique(grades).tolist()) == set(range(1, 11))
        # "236 rows duplicate another row": rows equal to an earlier row, label
        # included; repr makes two missing cells in the same place compare equal
        rows = [repr((x, label)) for x, label in zip(X.tolist(), y.tolist())]
        assert len(rows) - len(set(rows)) == 236

    def test_pima_zero_codes(self):
        X, _, names = load_table("pimaindiansdiabetes")
        zeros = dict(zip(names, (X == 0).sum(axis=0).tolist()))
        # zeros that stand for missing values: UCI pima-indians-diabetes.names and the
        # literature's usual counts (from memory)
        expected = {"glucose": 5, "pressure": 35, "triceps": 227, "insulin": 374}
        assert {k: zeros[k] for k in expected} == expected and zeros["mass"] == 11


class TestPublished:
    def test_value_in_the_files_unit(self):
        # Breiman 2001, Random Forests, Table 2: sonar, one tree 31.7% (from memory)
        assert published("sonar", "One tree") == 31.7
        # Breiman 1996, Bagging Predictors, Sec. 3: friedman2 bagged MSE (from memory)
        assert published("friedman2", "bagged trees (25)") == 22100.0

    def test_source_tells_the_papers_apart(self):
        record = published_record("ringnorm", "Bayes rule", source="Delve")
        assert float(record["value"]) == 1.3 and record["unit"] == "%"
        assert record["status"].startswith("confirmed in text")

    def test_ambiguous_or_missing_rows_raise(self):
        with pytest.raises(LookupError, match=r"^2 rows of published_values.csv match"):
            published("sonar", "Forest-RI")
        with pytest.raises(LookupError, match=r"^0 rows .* dataset='nowhere'"):
            published("nowhere", "bagging")

    def test_text_value_raises(self):
        with pytest.raises(ValueError, match=r"is text, not a number: 'about 37%'"):
            published("-", "bootstrap")

    def test_every_row_has_a_status(self):
        with open(DATA_DIR / "published_values.csv", newline="") as handle:
            rows = list(csv.DictReader(handle))
        assert len(rows) > 50
        statuses = {row["status"].split(" (")[0] for row in rows}
        assert statuses == {"from memory", "confirmed in text"}
