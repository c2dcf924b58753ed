"""End to end: the README's demo runs as a user would run it and prints what it promises."""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "examples" / "batch_inspection.py"


@pytest.fixture(scope="module")
def demo_run():
    pytest.importorskip("pandas")   # the demo reads a data frame (pip install 'forestlab[frames]')
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(ROOT), *filter(None, [env.get("PYTHONPATH")])])
    return subprocess.run([sys.executable, "-W", "error", str(DEMO)], cwd=ROOT, env=env,
                          capture_output=True, text=True, timeout=300)


@pytest.mark.slow
class TestBatchInspectionDemo:
    """examples/batch_inspection.py: invented coatings-plant batches, flagged for a second inspection."""

    def test_exits_cleanly(self, demo_run):
        assert demo_run.returncode == 0, demo_run.stderr
        assert demo_run.stderr == ""

    def test_key_lines(self, demo_run):
        out = demo_run.stdout
        assert "forest: 300 trees on 1500 batches x 8 measurements" in out
        supplier = r"^.pigment_supplier. is categorical \(4 suppliers\); \d+ humidity readings are missing$"
        assert re.search(supplier, out, re.M)
        assert "classes (vote columns): ['pass', 'rework']" in out
        error = float(re.search(r"^error on 500 new batches: (0\.\d{3})$", out, re.M).group(1))
        # About 3% of grades are recorded wrongly on purpose, so the error cannot be near 0; a working forest
        # stays well below the 'rework' share.
        assert 0.03 < error < 0.2
        flagged = int(re.search(r"worth a second inspection: (\d+)$", out, re.M).group(1))
        listed = re.findall(r"^  batch +\d+: (\d+)% of trees say rework; lab graded '(pass|rework)'$", out, re.M)
        assert flagged > 0 and len(listed) == min(8, flagged)
        assert all(30 <= int(share) <= 70 for share, _ in listed)  # printed rounded

    def test_out_of_bag_lines(self, demo_run):
        # Breiman (1996), "Out-of-bag estimation": the OOB error estimates the error on new cases; both are
        # proportions of about 1500 and 500 cases, so they agree within a few points.
        out = demo_run.stdout
        oob = float(re.search(r"^out-of-bag error \(no test set needed\): (0\.\d{3})$", out, re.M).group(1))
        new = float(re.search(r"^error on 500 new batches: (0\.\d{3})$", out, re.M).group(1))
        assert abs(oob - new) < 0.05
        settled = int(re.search(r"within 10% of its final value from (\d+) trees on", out, re.M).group(1))
        assert 1 <= settled <= 300
        rows = re.findall(r"^ *(\d+)  (pass|rework) +(pass|rework) +(-\d\.\d{3}) +(\d+)$", out, re.M)
        assert len(rows) == 10 and all(observed != oob_label for _, observed, oob_label, _, _ in rows)
        margins = [float(m) for *_, m, _ in rows]
        assert margins == sorted(margins)
        found = int(re.search(r"^(\d+) of these 10 were deliberately misgraded", out, re.M).group(1))
        assert found >= 7          # measured 10 of 10

    def test_reasons_of_the_two_most_doubtful_batches(self, demo_run):
        # The block explains the first two rows of the doubtful table by their out-of-bag attributions.
        out = demo_run.stdout
        block = out[out.index("why the forest doubts the grades of the 2 most doubtful batches"):]
        table = re.findall(r"^ *(\d+)  (pass|rework) +(pass|rework) +(-\d\.\d{3}) +(\d+)$", out, re.M)
        cases = re.findall(r"^case (\d+): recorded '(pass|rework)', but (\d+)% of its (\d+) out-of-bag trees vote "
                           r"'(pass|rework)' \((\d+)% for the record\)$", block, re.M)
        assert [c[0] for c in cases] == [row[0] for row in table[:2]]
        assert all(recorded != voted and int(share) > 50 for _, recorded, share, _, voted, _ in cases)
        against = re.findall(r"^  speaks against the record: (\w+) = \S+ \(\+\d\.\d{3}\)", block, re.M)
        assert len(against) == 2 and all(name in block for name in against)
        assert re.search(r"^caution: these are the model's reasons, not findings; validate on your own data", block,
                         re.M)

@pytest.mark.slow
class TestHowSureBlock:
    """The demo's last block: prediction sets for new batches and doubtful grades at a stated FDR."""

    def test_prediction_sets(self, demo_run):
        out = demo_run.stdout
        assert "-- how sure: 90% prediction sets (out-of-bag conformal, coverage within each grade) --" in out
        rows = re.findall(r"^  new batch \d: forest says '(pass|rework)' \((\d+)% of trees say rework\); "
                          r"plausible grades: \{([a-z, ]*)\}; lab graded '(pass|rework)'$", out, re.M)
        assert len(rows) == 6
        for said, share, grades, _ in rows:
            assert (said == "rework") == (int(share) > 50) or int(share) == 50
            assert set(filter(None, grades.split(", "))) <= {"pass", "rework"}
        one, both, none, held = re.search(r"^on the 500 new batches: (\d+) sets name one grade, (\d+) both, (\d+) "
                                          r"none; they hold the lab's grade for (\d+\.\d)% \(nominal 90%\)$",
                                          out, re.M).groups()
        assert int(one) + int(both) + int(none) == 500
        # Conformal coverage (Vovk, Gammerman & Shafer 2005): a binomial proportion of 500 around 0.9, sd 1.3%
        assert abs(float(held) - 90) < 4.5

    def test_doubtful_at_a_false_discovery_rate(self, demo_run):
        out = demo_run.stdout
        assert "-- doubtful past grades at a false discovery rate of 10% --" in out
        assert "a second grader confirmed 1000 randomly chosen past grades; the other 500 are tested" in out
        head = re.search(r"^(\d+) doubtful cases \(Benjamini-Hochberg at false discovery rate 0\.1: 500 cases "
                         r"tested against 1000 trusted\), most doubtful first$", out, re.M)
        rows = re.findall(r"^ *\d+  (pass|rework) +(pass|rework) +[-+]\d\.\d{3} +\d+ +(0\.\d{4})$", out, re.M)
        assert head and len(rows) == int(head.group(1)) > 0
        p = [float(v) for *_, v in rows]
        assert p == sorted(p) and max(p) <= 0.1
        found, listed = map(int, re.search(r"^(\d+) of these (\d+) were deliberately misgraded in the invented "
                                           r"data \(the expected share", out, re.M).groups())
        assert listed == len(rows) and found >= 0.8 * listed      # measured 13 of 13
        assert out.rstrip().endswith("a model does not replace the lab's judgement or the rules that apply where "
                                     "you work.")
