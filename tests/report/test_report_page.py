"""``forest.report``: a valid, self-contained HTML5 page whose numbers are those of the Python objects."""

from __future__ import annotations

import base64
import json
import re
import sys

import numpy as np
import pytest
from reading import Tables, breast_cancer_forest, glass_regression_forest

import forestlab as fl

pytest.importorskip("matplotlib")
html5lib = pytest.importorskip("html5lib")
pytest.importorskip("pandas")

SECTIONS = ["fit", "oob", "votes", "doubtful", "importance", "dependence", "new-cases", "caution"]


@pytest.fixture(scope="module")
def classification(tmp_path_factory):
    forest, frame, _ = breast_cancer_forest()
    path = forest.report(tmp_path_factory.mktemp("report") / "forest.html", X_new=frame.iloc[::7])
    return forest, frame, path.read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def regression(tmp_path_factory):
    forest, X = glass_regression_forest()
    return forest, X, forest.report(tmp_path_factory.mktemp("report") / "forest.html").read_text(encoding="utf-8")


def test_the_page_is_valid_html5(classification, regression):
    for _, _, document in (classification, regression):
        html5lib.HTMLParser(strict=True).parse(document)  # raises on any parse error of the HTML5 algorithm
        assert document.startswith("<!DOCTYPE html>")


def test_the_page_holds_no_external_reference(classification, regression):
    for _, _, document in (classification, regression):
        outside_data = re.sub(r"data:image/svg\+xml;base64,[A-Za-z0-9+/=]+", "DATA", document)
        assert "http" not in outside_data and "//" not in outside_data.replace("<!DOCTYPE", "")
        assert re.findall(r'src="([^"]*)"', document) and all(
            src.startswith("data:") for src in re.findall(r'src="([^"]*)"', document))
        for tag in ("<script", "<link", "<iframe", "<object", "@import", "url("):
            assert tag not in outside_data
        for svg in re.findall(r"base64,([A-Za-z0-9+/=]+)", document):  # the pictures point only inside themselves
            hrefs = re.findall(r'href="([^"]*)"', base64.b64decode(svg).decode("utf-8"))
            assert all(h.startswith("#") for h in hrefs)


def test_the_sections_and_the_caution(classification):
    _, _, document = classification
    page = Tables(document)
    assert [s for s in page.ids if s in SECTIONS] == SECTIONS
    assert len(set(page.ids)) == len(page.ids)
    assert "professional judgement" in document and "@media print" in document


def test_classification_numbers_are_the_objects(classification, tmp_path):
    forest, frame, document = classification
    page = Tables(document)
    oob = forest.oob
    tiles = dict(re.findall(r'<dt>([^<]+)</dt><dd><span class="n" data-value="([^"]+)"', document))
    assert float(tiles["misclassification rate"]) == oob.error
    assert int(tiles["settles at"]) == oob.settles_at(0.05)
    assert float(tiles["strength"]) == oob.strength and float(tiles["correlation"]) == oob.correlation
    confusion = np.array([[float(c[1]) for c in row[1:3]] for row in page.tables["confusion"][1:]])
    np.testing.assert_array_equal(confusion, oob.confusion)
    assert page.values("confusion", 4) == oob.by_class.tolist()
    doubtful = oob.doubtful()
    assert page.values("doubtful-table", 0) == doubtful.case[:20].tolist()
    assert page.values("doubtful-table", 3) == doubtful.margin[:20].tolist()
    assert page.texts("doubtful-table", 1) == [str(v) for v in doubtful.observed[:20]]
    found = forest.importance(rng=0)
    assert page.texts("importance-table", 1) == [found.names[k] for k in found.ranking]
    assert page.values("importance-table", 2) == found.scores[found.ranking].tolist()
    assert page.values("importance-table", 3) == found.spread[found.ranking].tolist()
    forest.save(tmp_path / "forest.npz")
    with np.load(tmp_path / "forest.npz") as stored:
        fingerprint = json.loads(stored["header"].tobytes())["fingerprint"]
    facts = {row[0][0]: row[1][0] for row in page.tables["fit-facts"][1:]}
    assert facts["data fingerprint (SHA-256)"] == fingerprint and facts["cases"] == str(frame.shape[0])
    new = frame.iloc[::7]
    assert page.texts("new-cases-table", 1)[:20] == forest.predict(new)[:20].tolist()
    assert page.values("new-cases-table", 2)[:20] == forest.votes(new)[:20, 0].tolist()
    # what a reader sees: the same numbers to four significant digits
    assert page.texts("importance-table", 2) == [f"{v:.4g}" for v in found.scores[found.ranking]]
    assert page.tables["confusion"][1][1][0] == str(oob.confusion[0, 0])


def test_regression_numbers_are_the_objects(regression):
    forest, _, document = regression
    page = Tables(document)
    oob = forest.oob
    tiles = dict(re.findall(r'<dt>([^<]+)</dt><dd><span class="n" data-value="([^"]+)"', document))
    assert float(tiles["mean squared error"]) == oob.error
    assert float(tiles["explained variance"]) == oob.explained_variance
    residuals = oob.residuals[oob.coverage > 0]
    values = dict(zip(page.texts("residuals", 0), page.values("residuals", 1)))
    assert values["root mean squared residual"] == pytest.approx(np.sqrt(oob.error), rel=1e-12)
    assert values["50% quantile"] == np.quantile(residuals, 0.5)
    assert values["cases with an out-of-bag prediction"] == residuals.size
    doubtful = oob.doubtful(threshold=2.0)
    assert page.values("doubtful-table", 3) == doubtful.margin[:20].tolist()
    assert "new-cases" not in page.ids


def test_pictures_have_titles_and_axis_labels(classification):
    forest, _, document = classification
    page = Tables(document)
    assert {"trees", "OOB error"} <= set(page.svg_text("oob-curve"))
    assert any(t.startswith("rise in OOB error when shuffled") for t in page.svg_text("importance-bars"))
    found = forest.importance(rng=0)
    for k in found.ranking[:3]:
        j = found.columns[k][0]
        labels = page.svg_text(f"dependence-{j}")
        assert forest.feature_names[j] in labels and "share of votes for 'malignant'" in labels


def test_a_forest_loaded_without_its_data(tmp_path):
    forest, _ = glass_regression_forest()
    forest.save(tmp_path / "forest.npz")
    loaded = fl.load(tmp_path / "forest.npz")
    document = loaded.report(tmp_path / "loaded.html").read_text(encoding="utf-8")
    page = Tables(document)
    assert "impurity importance" in document and "Not available: the forest was loaded without" in document
    assert page.values("importance-table", 2) == sorted(loaded.importance("impurity").scores, reverse=True)


def test_clear_errors(classification, tmp_path, monkeypatch):
    forest, frame, _ = classification
    with pytest.raises(FileNotFoundError, match=r"`path` .* folder that does not exist"):
        forest.report(tmp_path / "no such folder" / "forest.html")
    with pytest.raises(RuntimeError, match="not fitted"):
        fl.Forest().report(tmp_path / "forest.html")
    with pytest.raises(ValueError, match=r"`X_new` must have 9 features, as in training; got 3"):
        forest.report(tmp_path / "forest.html", X_new=np.zeros((4, 3)))
    with pytest.raises(ValueError, match=r"`X_new` columns must be the 9 features seen in fit"):
        forest.report(tmp_path / "forest.html", X_new=frame.iloc[:, :4])
    with pytest.raises(ValueError, match="`features` must be a positive int"):
        forest.report(tmp_path / "forest.html", features=0)
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    with pytest.raises(ImportError, match=r"pip install 'forestlab\[plot\]'"):
        forest.report(tmp_path / "forest.html")
    assert not (tmp_path / "forest.html").exists()
