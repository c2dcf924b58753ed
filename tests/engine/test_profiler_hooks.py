"""benchmarks/level_passes.py times the level loop by wrapping engine functions by name; a renamed engine
function must fail here, not silently in the profiler on the next machine."""

import importlib.util
import sys
from pathlib import Path

BENCHMARKS = Path(__file__).resolve().parents[2] / "benchmarks"


def test_every_wrapped_engine_function_exists():
    sys.path.insert(0, str(BENCHMARKS))
    try:
        spec = importlib.util.spec_from_file_location("level_passes_under_test", BENCHMARKS / "level_passes.py")
        module = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(module)
    finally:
        sys.path.remove(str(BENCHMARKS))
    missing = [f"{getattr(owner, '__name__', owner)}.{attr}" for owner, attr, _ in module.WRAPPED
               if attr not in owner.__dict__]
    missing += [f"{owner.__name__}.{attr}" for owner, attr in module.SIZED if attr not in owner.__dict__]
    assert not missing
    assert {name for _, _, name in module.WRAPPED} <= set(module.PASSES)
