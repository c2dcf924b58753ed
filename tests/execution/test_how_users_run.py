"""``workers=2`` the way users run Python: a plain script without a main guard, ``python -c``, an interactive
interpreter fed on stdin, and a notebook kernel (a real one, driven through jupyter_client).

Each form runs in a subprocess and fits the same forest with ``workers=2`` and ``workers=1``; the two must be
bit for bit the same (the seeding contract: tree ``b`` draws only from its own ``SeedSequence`` child, numpy
``SeedSequence.spawn``, common practice), the user's code must have run exactly once (worker processes never
import ``__main__``), and nothing may be left behind: no worker process, no shared-memory segment.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest

import forestlab as fl
from processes import children, leftover_segments, session_members, wait_gone

ROOT = str(Path(fl.__file__).parents[1])

# What the user types: the analysis, as most are written (no main guard, no function).
ANALYSIS = textwrap.dedent("""
    import hashlib, os
    import forestlab as fl
    from forestlab.synthetic import twonorm
    print("the analysis runs in", os.getpid())
    X, y = twonorm(300, dims=5, rng=1)

    def digest(forest):
        h = hashlib.sha256(forest.inbag.tobytes())
        for b in range(forest.trees):
            tree = forest.tree(b)
            for part in (tree.feature, tree.threshold, tree.left, tree.value, tree.cases):
                h.update(part.tobytes())
        return h.hexdigest()

    two = fl.Forest(trees=24, workers=2, rng=3).fit(X, y)
    one = fl.Forest(trees=24, rng=3).fit(X, y)
    print("same forest:", digest(two) == digest(one), "pid", os.getpid())
""")


def _env() -> dict[str, str]:
    return dict(os.environ, PYTHONPATH=os.pathsep.join([ROOT, os.environ.get("PYTHONPATH", "")]))


def _run(args: list[str], stdin: str | None = None, cwd: Path | None = None) -> subprocess.CompletedProcess:
    with subprocess.Popen(args, stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                          env=_env(), cwd=cwd, start_new_session=True) as proc:
        try:
            out, err = proc.communicate(stdin, timeout=120)
        finally:
            if proc.poll() is None:
                os.killpg(proc.pid, signal.SIGKILL)
                proc.wait()
        assert wait_gone(session_members(proc.pid)) == [], "a process outlived the session"
    return subprocess.CompletedProcess(args, proc.returncode, out, err)


def _check(out: str, err: str) -> None:
    """The analysis ran once, the forests agree, and the fitting process left no segment."""
    assert out.count("the analysis runs in") == 1, out + err
    assert "same forest: True" in out, out + err
    assert leftover_segments(int(out.split("same forest: True pid ")[1].split()[0])) == []


def test_plain_script_without_a_main_guard(tmp_path):
    """Also in Python's development mode with resource warnings as errors (the workers inherit both): nothing
    is left unclosed at exit, in the script or its workers, and no resource is left for the tracker to
    report."""
    (tmp_path / "analysis.py").write_text(ANALYSIS)
    done = _run([sys.executable, "-X", "dev", "-W", "error::ResourceWarning", "analysis.py"], cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    _check(done.stdout, done.stderr)
    assert "Warning" not in done.stderr and "leaked" not in done.stderr, done.stderr


def test_python_dash_c():
    done = _run([sys.executable, "-c", ANALYSIS])
    assert done.returncode == 0, done.stderr
    _check(done.stdout, done.stderr)


def test_interactive_interpreter_fed_on_stdin():
    """``python -i`` reading the session from a pipe: ``__main__`` is the interactive namespace, with no file."""
    done = _run([sys.executable, "-i", "-q"], stdin=ANALYSIS + "\n")
    assert done.returncode == 0, done.stderr
    assert "Traceback" not in done.stderr, done.stderr
    _check(done.stdout, done.stderr)


def test_notebook_kernel():
    """A real IPython kernel (the one a notebook talks to), started and driven by jupyter_client."""
    manager_module = pytest.importorskip("jupyter_client.manager")
    pytest.importorskip("ipykernel")
    manager, client = manager_module.start_new_kernel(kernel_name="python3", env=_env())
    shown, errors = [], []

    def collect(message):
        if message["msg_type"] == "stream":
            shown.append(message["content"]["text"])
        elif message["msg_type"] == "error":
            errors.append(f"{message['content']['ename']}: {message['content']['evalue']}")

    try:
        kernel_pid = manager.provisioner.process.pid
        reply = client.execute_interactive(ANALYSIS, timeout=120, output_hook=collect)
        workers = children(kernel_pid)
    finally:
        client.stop_channels()
        manager.shutdown_kernel(now=True)
    assert reply["content"]["status"] == "ok" and not errors, errors
    _check("".join(shown), "")
    # the kernel's idle workers (kept for its next fit) end with the kernel
    assert wait_gone(workers) == []


def test_a_class_of_the_users_main_module_is_refused_with_what_to_do():
    """Worker processes do not run ``__main__``, so they cannot rebuild a class defined there: the fit says so
    (and what to do) before any process starts."""
    Local = type("Local", (fl.CandidateSampler,), {"__module__": "__main__",
                                                   "draw": lambda self, rng, nodes, features: np.ones(
                                                       (nodes, features), dtype=bool)})
    X = np.random.default_rng(0).normal(size=(60, 3))
    y = X[:, 0] > 0
    with pytest.raises(ValueError, match=r"`sampler`: the class Local is defined in your script, notebook or "
                                         r"session \(`__main__`\), which worker processes do not run; define it "
                                         r"in a module of its own .* or fit with `workers=1`"):
        fl.Forest(trees=4, workers=2, sampler=Local(), rng=0).fit(X, y)
    assert fl.Forest(trees=4, sampler=Local(), rng=0).fit(X, y).trees == 4
