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
