"""Which production batches need a second inspection?

A (fictional) coatings plant records seven process measurements and the pigment supplier for every batch it
makes, and its quality lab later grades each batch "pass" or "rework". The humidity sensor drops out now and
then, so some readings are missing. The lab wants a forest that flags new batches for a second inspection, an
honest error estimate without setting aside a test set, and a list of past batches whose grade the forest
finds doubtful (possible grading mistakes or borderline cases worth a second look).

All data here are invented by the seeded generator below; run ``python examples/batch_inspection.py``
(needs pandas: ``pip install 'forestlab[frames]'``).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

import forestlab as fl

MEASUREMENTS = ["oven_temp_C", "line_speed_m_min", "humidity_pct", "viscosity_cP", "film_um", "cure_min",
                "pigment_lot_age_d", "pigment_supplier"]
SUPPLIERS = ["Ardent", "Brightwell", "Corvane", "Dunmore"]


def make_batches(n: int, rng: np.random.Generator) -> tuple[pd.DataFrame, np.ndarray, np.ndarray]:
    """Invented process records (a data frame), grades, and which grades were deliberately recorded wrongly
    (about 3%). The supplier column is categorical; about 6% of humidity readings are missing."""
    oven = rng.normal(182, 6, n)
    speed = rng.normal(24, 3, n)
    humidity = rng.uniform(25, 70, n)
    viscosity = rng.lognormal(np.log(950), 0.15, n)
    film = rng.normal(38, 4, n) - 0.25 * (speed - 24)
    cure = rng.normal(22, 2.5, n)
    lot_age = rng.exponential(40, n)
    supplier = rng.choice(SUPPLIERS, n, p=[0.4, 0.3, 0.2, 0.1])
    risk = (0.35 * np.abs(oven - 182) + 0.08 * np.maximum(humidity - 55, 0) ** 1.5
            + 0.9 * np.maximum(34 - film, 0) + 0.6 * np.maximum(19 - cure, 0) + 0.01 * lot_age
            + 1.2 * np.isin(supplier, ["Corvane", "Dunmore"]))
    rework = risk + rng.normal(0, 0.4, n) > 3.2
    flipped = rng.random(n) < 0.03
    grade = np.where(rework ^ flipped, "rework", "pass")
    humidity = np.where(rng.random(n) < 0.06, np.nan, humidity)   # sensor drop-outs
    frame = pd.DataFrame(dict(zip(MEASUREMENTS, [oven, speed, humidity, viscosity, film, cure, lot_age,
                                                 pd.Categorical(supplier, categories=SUPPLIERS)])))
    return frame, grade, flipped


# The error curve "levels off" at the smallest number of trees after which it stays within this fraction of
# the final out-of-bag error (OutOfBag.settles_at).
LEVEL_BAND = 0.10


def main() -> None:
    rng = np.random.default_rng(2026)
    X, grade, misgraded = make_batches(1500, rng)
    new_X, new_grade, _ = make_batches(500, rng)
    forest = fl.Forest(trees=300, rng=11).fit(X, grade)
    print(f"forest: {forest.trees} trees on {X.shape[0]} batches x {X.shape[1]} measurements")
    gaps = int(X["humidity_pct"].isna().sum())
    print(f"'pigment_supplier' is categorical ({len(SUPPLIERS)} suppliers); {gaps} humidity readings are missing")
    print(f"classes (vote columns): {forest.classes.tolist()}")
    oob = forest.oob
    error = np.mean(forest.predict(new_X) != new_grade)
    print(f"out-of-bag error (no test set needed): {oob.error:.3f}")
    print(f"error on 500 new batches: {error:.3f}")
    settled = oob.settles_at(LEVEL_BAND)
    print(f"the OOB error curve stays within {LEVEL_BAND:.0%} of its final value from {settled} trees on "
          f"(curve at 10, 50, 100 trees: {oob.error_curve[9]:.3f}, {oob.error_curve[49]:.3f}, "
          f"{oob.error_curve[99]:.3f})")
    doubtful = oob.doubtful(top=10)
    print(doubtful)
    found = np.count_nonzero(misgraded[doubtful.case])
    print(f"{found} of these {len(doubtful)} were deliberately misgraded in the invented data")
    share = forest.votes(new_X)[:, list(forest.classes).index("rework")]
    close = np.flatnonzero((share > 0.3) & (share < 0.7))
    print(f"new batches with a split vote (30-70% 'rework'), worth a second inspection: {close.size}")
    for i in close[:8]:
        print(f"  batch {i:4d}: {share[i]:.0%} of trees say rework; lab graded {str(new_grade[i])!r}")
    explain_most_doubtful(forest, doubtful)
    how_sure(forest, misgraded, new_X, new_grade)


def explain_most_doubtful(forest: fl.Forest, doubtful: fl.DoubtfulCases, batches: int = 2) -> None:
    """Why the forest doubts the grade of the most doubtful past batches, in words."""
    print(f"\nwhy the forest doubts the grades of the {batches} most doubtful batches")
    print("(each batch is explained only by the trees that never saw it; a + number is how much a measurement")
    print(" widens those trees' vote margin against the recorded grade, a - number how much it narrows it)")
    reasons = forest.doubt_reasons(doubtful.case[:batches])
    for i in range(len(reasons)):
        print(reasons.describe(i))
        name, value, pull = reasons.reasons(i)[0]
        print(f"  first check: the {name} reading ({value}) and the grading record of batch {reasons.case[i]}")
    print("caution: these are the model's reasons, not findings; validate on your own data, and use them to direct")
    print("a second inspection, not to replace the lab's judgement or the rules that apply at your plant")


# Level of the prediction sets, false discovery rate of the doubtful grades, and how many past grades a second
# grader confirmed (drawn at random among the correct ones of the invented data).
SET_LEVEL = 0.9
FDR = 0.1
CONFIRMED = 1000


def how_sure(forest: fl.Forest, misgraded: np.ndarray, new_X: pd.DataFrame, new_grade: np.ndarray) -> None:
    """How sure the forest is about each new batch (conformal prediction sets from the out-of-bag votes), and
    which past grades are doubtful at a stated false discovery rate (conformal p-values against confirmed
    grades)."""
    print(f"\n-- how sure: {SET_LEVEL:.0%} prediction sets (out-of-bag conformal, coverage within each grade) --")
    sets = forest.prediction_sets(new_X, level=SET_LEVEL, by_class=True, rng=5)
    rework = list(forest.classes).index("rework")
    for i in (0, 1, 2, 3, 4, 5):
        print(f"  new batch {i}: forest says {str(forest.classes[np.argmax(sets.shares[i])])!r} "
              f"({sets.shares[i, rework]:.0%} of trees say rework); plausible grades: "
              f"{{{', '.join(map(str, sets.labels(i)))}}}; lab graded {str(new_grade[i])!r}")
    one = int(np.count_nonzero(sets.size == 1))
    print(f"on the 500 new batches: {one} sets name one grade, {sets.full} both, {sets.empty} none; they hold "
          f"the lab's grade for {sets.covers(new_grade).mean():.1%} (nominal {SET_LEVEL:.0%})")
    rng = np.random.default_rng(7)
    confirmed = rng.choice(np.flatnonzero(~misgraded), CONFIRMED, replace=False)
    doubtful = forest.oob.doubtful(fdr=FDR, trusted=confirmed)
    print(f"\n-- doubtful past grades at a false discovery rate of {FDR:.0%} --")
    print(f"a second grader confirmed {CONFIRMED} randomly chosen past grades; the other "
          f"{doubtful.tested} are tested against them")
    print(doubtful)
    found = int(np.count_nonzero(misgraded[doubtful.case]))
    print(f"{found} of these {len(doubtful)} were deliberately misgraded in the invented data (the expected "
          f"share of right grades among the flagged is at most {FDR:.0%})")
    print("Caution: validate on your own data; a model does not replace the lab's judgement or the rules that "
          "apply where you work.")


if __name__ == "__main__":
    main()
