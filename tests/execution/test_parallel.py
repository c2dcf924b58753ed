"""Parallel fitting: the forest does not depend on workers, executor or block size; failures clean up.

The invariance follows from the seeding contract (tree b draws only from ``SeedSequence(entropy,
spawn_key=(b,))``; numpy ``SeedSequence.spawn``, common practice), so every check compares a parallel fit
with the plain single-process fit bit for bit.
"""

from __future__ import annotations

import multiprocessing
import os
import signal
import subprocess
import sys
import textwrap
import threading
import time
from concurrent.futures import ProcessPoolExecutor, ThreadPoolExecutor
from dataclasses import fields
from pathlib import Path

import numpy as np
import pytest

import forestlab as fl
import forestlab._fitting as forest_module
from forestlab.execution import parallel as _parallel
from forestlab.execution import pool as _pool
from forestlab.synthetic import friedman1, twonorm
from processes import leftover_segments, session_members, wait_gone


def _problem(task="classification", n=240):
    if task == "classification":
        return twonorm(n, dims=6, rng=11)
    return friedman1(n, rng=12)


def _assert_same_forest(a: fl.Forest, b: fl.Forest) -> None:
    """Bit for bit: every array of every tree, the in-bag counts, and read-only flags."""
    assert a.inbag.tobytes() == b.inbag.tobytes()
    assert not b.inbag.flags.writeable
    assert len(a._view.trees) == len(b._view.trees)
    for ta, tb in zip(a._view.trees, b._view.trees):
        for f in fields(ta):
            xa, xb = getattr(ta, f.name), getattr(tb, f.name)
            assert xa.dtype == xb.dtype and xa.shape == xb.shape and xa.tobytes() == xb.tobytes(), f.name
            assert not xb.flags.writeable


def _callers_context() -> multiprocessing.context.BaseContext:
    """A context for a process pool of the caller's own (not fork: see forestlab.execution.pool)."""
    return multiprocessing.get_context("forkserver" if "forkserver" in multiprocessing.get_all_start_methods()
                                       else "spawn")


class Misbehaving(fl.CandidateSampler):
    """All features, except in a process other than ``parent``: record the pid, then raise or die.

    With ``once`` only the first worker to get there (an exclusive file) misbehaves.
    """

    def __init__(self, parent: int, action: str, folder: str, once: bool = False) -> None:
        self.parent, self.action, self.folder, self.once = parent, action, folder, once

    def draw(self, rng, nodes, features):
        if os.getpid() != self.parent:
            Path(self.folder, f"pid{os.getpid()}").touch()
            if self._chosen():
                if self.action == "raise":
                    raise ValueError("boom in a worker")
                self._await_another_worker()
                os.kill(os.getpid(), signal.SIGKILL)
        return np.ones((nodes, features), dtype=bool)

    def _await_another_worker(self, seconds: float = 10.0) -> None:
        """Give the other worker time to start on a block (so a survivor exists that must not be blamed)."""
        end = time.monotonic() + seconds
        while len(list(Path(self.folder).glob("pid*"))) < 2 and time.monotonic() < end:
            time.sleep(0.01)

    def _chosen(self) -> bool:
        if not self.once:
            return True
        try:
            fd = os.open(Path(self.folder, "chosen"), os.O_CREAT | os.O_EXCL | os.O_WRONLY)
        except FileExistsError:
            return False
        os.write(fd, str(os.getpid()).encode())
        os.close(fd)
        return True


def _worker_pids(folder: Path) -> list[int]:
    return [int(p.name[3:]) for p in folder.glob("pid*")]


class TestValidation:
    def test_messages(self):
        with pytest.raises(ValueError, match=r"`workers` and `executor` are exclusive"):
            fl.Forest(workers=2, executor=ThreadPoolExecutor(1))
        with pytest.raises(TypeError, match=r"`executor` must be a concurrent.futures.Executor .* got str"):
            fl.Forest(executor="dask")
        with pytest.raises(TypeError, match=r"`executor` must be an executor instance such as "
                                            r"ProcessPoolExecutor\(\); got the class"):
            fl.Forest(executor=ProcessPoolExecutor)
        with pytest.raises(TypeError, match=r"`progress` must be None, True .* or a callable"):
            fl.Forest(progress="yes")
        with pytest.raises(ValueError, match=r"`workers` must be at least 1; got 0"):
            fl.Forest(workers=0)
        with pytest.raises(TypeError, match=r"`workers` must be an int; got float"):
            fl.Forest(workers=2.0)

    def test_repr_shows_the_run_settings(self):
        with ThreadPoolExecutor(1) as pool:
            text = repr(fl.Forest(10, executor=pool, progress=True))
        assert "executor=<concurrent.futures.thread.ThreadPoolExecutor" in text and "progress=True" in text
        assert repr(fl.Forest(10, workers=3)) == "Forest(trees=10, workers=3)"


class TestPlanBlocks:
    def test_blocks_cover_the_trees_in_order(self):
        ids = list(range(5, 205))
        for batch, par in [(64, 1), (64, 2), (1, 2), (7, 3), (500, 4)]:
            blocks = _parallel.plan_blocks(ids, batch, par)
            assert [b for block in blocks for b in block] == ids
            assert max(map(len, blocks)) <= (batch if par > 1 else batch + batch // 4)
            if par > 1 and batch >= 25:
                assert len(blocks) >= _parallel.BLOCKS_PER_WORKER * par

    def test_a_short_last_block_is_spread_over_the_others_in_one_process(self):
        """200 trees in batches of 64 would leave a block of 8; three blocks of 67, 67 and 66 instead."""
        assert [len(b) for b in _parallel.plan_blocks(range(200), 64)] == [67, 67, 66]
        assert [len(b) for b in _parallel.plan_blocks(range(100), 64)] == [64, 36]
        assert [len(b) for b in _parallel.plan_blocks(range(40), 64)] == [40]

    def test_workers_start_from_forestlab_not_by_fork(self, tmp_path):
        """Our workers are fresh interpreters running forestlab's boot code (never a fork of this process)."""
        X, y = _problem()
        fl.Forest(trees=8, rng=5, workers=2, sampler=_Recorder(str(tmp_path))).fit(X, y)
        commands = {Path(tmp_path, f"pid{p}").read_text() for p in _worker_pids(tmp_path) if p != os.getpid()}
        assert commands == {"\0".join(_pool.worker_command()) + "\0"}


@pytest.fixture(scope="module")
def reference():
    X, y = _problem()
    return X, y, fl.Forest(trees=18, rng=5).fit(X, y)


class TestInvariance:
    def test_workers_two(self, reference):
        X, y, ref = reference
        _assert_same_forest(ref, fl.Forest(trees=18, rng=5, workers=2).fit(X, y))
        assert leftover_segments() == []

    def test_thread_pool(self, reference):
        X, y, ref = reference
        with ThreadPoolExecutor(3) as pool:
            _assert_same_forest(ref, fl.Forest(trees=18, rng=5, executor=pool).fit(X, y))

    def test_process_pool_of_the_caller(self, reference):
        X, y, ref = reference
        context = _callers_context()
        with ProcessPoolExecutor(2, mp_context=context) as pool:
            _assert_same_forest(ref, fl.Forest(trees=18, rng=5, executor=pool).fit(X, y))
            # the same pool serves a second fit on other data (fresh segment, nothing cached)
            X2, y2 = _problem(n=150)
            _assert_same_forest(fl.Forest(trees=7, rng=1).fit(X2, y2),
                                fl.Forest(trees=7, rng=1, executor=pool).fit(X2, y2))
        assert leftover_segments() == []

    @pytest.mark.parametrize("max_batch", [1, 4, 64])
    def test_batch_sizes(self, reference, monkeypatch, max_batch):
        X, y, ref = reference
        monkeypatch.setattr(forest_module, "MAX_BATCH", max_batch)
        _assert_same_forest(ref, fl.Forest(trees=18, rng=5).fit(X, y))
        with ThreadPoolExecutor(2) as pool:
            _assert_same_forest(ref, fl.Forest(trees=18, rng=5, executor=pool).fit(X, y))

    def test_regression_with_workers_and_odd_blocks(self):
        X, y = _problem("regression", n=200)
        ref = fl.Forest(trees=9, rng=8).fit(X, y)
        _assert_same_forest(ref, fl.Forest(trees=9, rng=8, workers=2).fit(X, y))
        data, rules = ref._data, ref._grown.rules
        for batch in (1, 2, 5):
            trees, inbag = _parallel.grow_trees(data, rules, ref.seed, range(9), batch, workers=2)
            assert inbag.tobytes() == ref.inbag.tobytes()
            assert all(a.threshold.tobytes() == b.threshold.tobytes() for a, b in zip(ref._view.trees, trees))


    def test_missing_values_and_categories_travel_too(self):
        X, y = _problem(n=200)
        X[::7, 1] = np.nan
        X[:, 2] = np.floor(np.abs(X[:, 2]) * 3)  # a categorical column with a handful of codes
        ref = fl.Forest(trees=8, rng=4, categorical=[2]).fit(X, y)
        assert ref._data.missing and ref._data.categories is not None
        _assert_same_forest(ref, fl.Forest(trees=8, rng=4, categorical=[2], workers=2).fit(X, y))


class TestProgress:
    def test_callback_counts_trees_in_this_thread(self):
        X, y = _problem()
        calls, threads = [], set()

        def progress(done, total):
            calls.append((done, total))
            threads.add(threading.get_ident())

        fl.Forest(trees=18, rng=5, workers=2, progress=progress).fit(X, y)
        assert calls[0] == (0, 18) and calls[-1] == (18, 18)
        done = [d for d, _ in calls]
        assert done == sorted(done) and len(set(done)) == len(done) and len(calls) >= 3
        assert threads == {threading.get_ident()}

    def test_serial_fit_reports_every_batch(self, monkeypatch):
        monkeypatch.setattr(forest_module, "MAX_BATCH", 4)
        X, y = _problem()
        calls = []
        fl.Forest(trees=10, rng=5, progress=lambda d, t: calls.append(d)).fit(X, y)
        assert calls == [0, 4, 8, 10]

    def test_progress_line_on_stderr(self, capsys):
        X, y = _problem()
        fl.Forest(trees=6, rng=5, progress=True).fit(X, y)
        err = capsys.readouterr().err
        assert err.startswith("forestlab: 0/6 trees (0%)")
        assert "forestlab: 6/6 trees (100%)" in err and err.endswith("\n")


class TestFailures:
    def test_worker_that_raises(self, tmp_path):
        X, y = _problem()
        X_before = X.copy()
        forest = fl.Forest(trees=18, rng=5, workers=2, sampler=Misbehaving(os.getpid(), "raise", str(tmp_path)))
        with pytest.raises(fl.TreeGrowthError, match=r"growing trees \d+-\d+ \(block \d+ of \d+\) failed in a "
                                                     r"worker: ValueError: boom in a worker") as info:
            forest.fit(X, y)
        assert isinstance(info.value.__cause__, ValueError)
        assert len(info.value.trees) >= 1
        assert leftover_segments() == []
        assert wait_gone(_worker_pids(tmp_path)) == []
        assert X.flags.writeable and np.array_equal(X, X_before)

    def test_worker_killed(self, tmp_path):
        X, y = _problem()
        X_before = X.copy()
        sampler = Misbehaving(os.getpid(), "kill", str(tmp_path), once=True)
        forest = fl.Forest(trees=18, rng=5, workers=2, sampler=sampler)
        with pytest.raises(fl.TreeGrowthError, match=r"a worker process died unexpectedly .* while growing "
                                                     r"trees? \d+") as info:
            forest.fit(X, y)
        killed = int(Path(tmp_path, "chosen").read_text())
        assert f"worker pid {killed})" in str(info.value)
        assert str(info.value).count("block ") == 1  # the survivor's block is not blamed
        assert leftover_segments() == []
        assert wait_gone(_worker_pids(tmp_path)) == []
        assert X.flags.writeable and np.array_equal(X, X_before)

    def test_raise_in_the_callers_process_pool(self, tmp_path):
        X, y = _problem()
        context = _callers_context()
        sampler = Misbehaving(os.getpid(), "raise", str(tmp_path))
        with ProcessPoolExecutor(2, mp_context=context) as pool:
            with pytest.raises(fl.TreeGrowthError, match=r"ValueError: boom in a worker"):
                fl.Forest(trees=18, rng=5, sampler=sampler, executor=pool).fit(X, y)
            assert pool.submit(int, "3").result() == 3  # the caller's pool still works
        assert leftover_segments() == []

    def test_workers_that_cannot_start_say_what_to_do(self, monkeypatch):
        """A worker that exits before it is ready (say, an interpreter that cannot import forestlab), and a
        platform that cannot start processes at all: both errors end with what to do instead."""
        X, y = _problem()
        _pool._end_idle()   # no idle worker of an earlier fit: these must be started
        monkeypatch.setattr(_pool, "worker_command", lambda: [sys.executable, "-c", "raise SystemExit(3)"])
        with pytest.raises(fl.TreeGrowthError, match=r"died unexpectedly before it started on any block .* fit "
                                                     r"with `workers=1` or give `executor=` a pool of your own"):
            fl.Forest(trees=8, rng=5, workers=2).fit(X, y)
        monkeypatch.setattr(_pool, "worker_command", lambda: [str(Path(sys.executable).parent / "no-such-python")])
        with pytest.raises(RuntimeError, match=r"could not start worker processes for `workers=2` \(.*no-such-python"
                                               r".*\); fit with `workers=1`, or give `executor=` a pool of your own"):
            fl.Forest(trees=8, rng=5, workers=2).fit(X, y)
        assert leftover_segments() == []

    def test_interrupt_from_the_callback_stops_the_workers(self, tmp_path):
        X, y = _problem()
        def progress(done, total):
            if done:
                raise KeyboardInterrupt

        sampler = _Recorder(str(tmp_path))
        with pytest.raises(KeyboardInterrupt):
            fl.Forest(trees=40, rng=5, workers=2, sampler=sampler, progress=progress).fit(X, y)
        assert leftover_segments() == []
        workers = [p for p in _worker_pids(tmp_path) if p != os.getpid()]
        assert workers and wait_gone(workers) == []

    def test_ctrl_c_in_a_real_process(self, tmp_path):
        """SIGINT to the whole process group, as a terminal's Ctrl-C sends it."""
        script = textwrap.dedent("""
            import sys
            import forestlab as fl
            from forestlab.synthetic import twonorm
            def progress(done, total):
                print("done", done, flush=True)
            if __name__ == "__main__":
                X, y = twonorm(3000, dims=10, rng=1)
                fl.Forest(trees=2000, rng=1, workers=2, progress=progress).fit(X, y)
                print("finished", flush=True)
        """)
        path = tmp_path / "fit.py"
        path.write_text(script)
        env = dict(os.environ, PYTHONPATH=str(Path(fl.__file__).parents[1]))
        # (Ctrl-C as in a terminal: a job started in the background of a non-interactive shell, as CI may run
        # the suite, inherits SIGINT ignored, and Python then installs no KeyboardInterrupt handler)
        with subprocess.Popen([sys.executable, str(path)], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                              text=True, env=env, start_new_session=True,
                              preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL)) as proc:
            try:
                assert proc.stdout.readline().strip() == "done 0"
                assert proc.stdout.readline().startswith("done ")  # workers are running
                os.killpg(proc.pid, signal.SIGINT)
                out, err = proc.communicate(timeout=60)
            finally:
                if proc.poll() is None:
                    os.killpg(proc.pid, signal.SIGKILL)
                    proc.wait()
        assert proc.returncode != 0 and "KeyboardInterrupt" in err and "finished" not in out
        assert leftover_segments(proc.pid) == []
        assert wait_gone(session_members(proc.pid)) == []


    def test_worker_killed_half_way_through_a_reply(self, tmp_path):
        """A worker that dies while sending its result leaves half a message in its reply pipe (with the
        process pool we had before, the manager thread then waited for the rest forever: a hang of the Ctrl-C
        test, about one run in five). The fit must fail at once, naming the block. Run in a child process, so
        that a hang cannot keep this test process from exiting."""
        module = textwrap.dedent("""
            import os, signal
            import numpy as np
            import forestlab as fl
            from forestlab.execution import channel, worker

            class HalfReply(fl.CandidateSampler):
                def draw(self, rng, nodes, features):
                    if worker.pipes:  # in a worker: a header of 1000 bytes, 10 of them sent, then death
                        os.write(worker.pipes["replies"].fileno(), channel.HEADER.pack(1000) + b"x" * 10)
                        os.kill(os.getpid(), signal.SIGKILL)
                    return np.ones((nodes, features), dtype=bool)
        """)
        (tmp_path / "half.py").write_text(module)  # a module of its own: workers import HalfReply from it
        script = textwrap.dedent("""
            import forestlab as fl
            from forestlab.synthetic import twonorm
            from half import HalfReply
            X, y = twonorm(200, dims=4, rng=1)
            try:
                fl.Forest(trees=8, rng=1, workers=2, sampler=HalfReply()).fit(X, y)
            except fl.TreeGrowthError as error:
                print(error, flush=True)
        """)
        env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(Path(fl.__file__).parents[1]), str(tmp_path)]))
        with subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE,
                              stderr=subprocess.PIPE, text=True, env=env, start_new_session=True) as proc:
            try:
                out, err = proc.communicate(timeout=60)
            finally:
                if proc.poll() is None:
                    os.killpg(proc.pid, signal.SIGKILL)
                    proc.wait()
        assert proc.returncode == 0 and "a worker process died unexpectedly" in out and "worker pid" in out, err
        assert leftover_segments(proc.pid) == []


class _Recorder(fl.CandidateSampler):
    """All features; records the pid (file name) and command line (content) of every process that draws."""

    def __init__(self, folder: str) -> None:
        self.folder = folder

    def draw(self, rng, nodes, features):
        Path(self.folder, f"pid{os.getpid()}").write_text(Path("/proc/self/cmdline").read_text())
        return np.ones((nodes, features), dtype=bool)


class TestDask:
    def test_local_cluster_gives_the_same_forest(self, tmp_path):
        pytest.importorskip("dask")
        distributed = pytest.importorskip("distributed")
        X, y = _problem()
        ref = fl.Forest(trees=18, rng=5).fit(X, y)
        held = []
        with distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1, host="127.0.0.1",
                                      dashboard_address=None) as cluster, distributed.Client(cluster) as client:

            def progress(done, total):
                if done and not held:  # mid-fit: what does every cluster worker hold?
                    held.append(client.run(lambda dask_worker: sorted(
                        type(v).__name__ for v in dask_worker.data.values() if type(v).__name__ == "TrainingData")))

            forest = fl.Forest(trees=18, rng=5, executor=client.get_executor(), progress=progress).fit(X, y)
            failing = fl.Forest(trees=18, rng=5, executor=client.get_executor(),
                                sampler=Misbehaving(os.getpid(), "raise", str(tmp_path)))
            with pytest.raises(fl.TreeGrowthError, match=r"\(block \d+ of \d+\) failed in a worker: ValueError: boom"):
                failing.fit(X, y)
        _assert_same_forest(ref, forest)
        # the training data were sent once to each of the two workers, not once per block
        assert list(held[0].values()) == [["TrainingData"], ["TrainingData"]]
