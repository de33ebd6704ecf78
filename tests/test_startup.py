"""Start-up and threading behaviour of whole processes: what ``import wavefit`` and the command
line's parser load, and the one-BLAS-thread rule when numpy was imported before wavefit.

Each check runs in a fresh interpreter (this test process has long loaded everything).
Times are not tested here: ``benchmarks/startup_time.py`` measures them.
"""
from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from wavefit.blas_threads import THREAD_VARIABLES
from wavefit.synth.rl import rl_square_wave
from wavefit.synth.scope import ScopeModel

SOURCE_TREE = Path(__file__).resolve().parents[1]
#: Libraries that take most of a cold start and that neither ``import wavefit`` nor ``--help`` needs.
HEAVY = ("pandas", "matplotlib", "scipy", "scipy.optimize", "lmfit", "uncertainties")


def run_python(code: str, cwd: Path, **environment: str) -> str:
    """Run ``code`` in a fresh interpreter with this source tree first on the path and without
    the BLAS thread variables (unless given); its standard output."""
    env = {key: value for key, value in os.environ.items() if key not in THREAD_VARIABLES}
    env.update(environment, PYTHONPATH=os.pathsep.join(filter(None, [str(SOURCE_TREE), env.get("PYTHONPATH")])))
    done = subprocess.run([sys.executable, "-c", textwrap.dedent(code)], cwd=cwd, env=env, capture_output=True,
                          text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    return done.stdout


def loaded_heavy(code: str, cwd: Path) -> list[str]:
    """The HEAVY libraries in ``sys.modules`` after ``code`` ran in a fresh interpreter."""
    report = f"import sys, json\nprint(json.dumps([m for m in {HEAVY!r} if m in sys.modules]))"
    out = run_python(textwrap.dedent(code) + "\n" + report, cwd)
    return json.loads(out.splitlines()[-1])


def test_import_loads_no_heavy_library(tmp_path):
    assert loaded_heavy("import wavefit", tmp_path) == []


def test_version_and_help_load_no_heavy_library(tmp_path):
    code = """
        import contextlib, io
        from wavefit.cli import main
        for argv in (["--version"], ["--help"], ["batch", "--help"], ["calibrate", "reference", "--help"]):
            with contextlib.redirect_stdout(io.StringIO()), contextlib.suppress(SystemExit):
                main(argv)
    """
    assert loaded_heavy(code, tmp_path) == []


def test_public_functions_load_on_first_use(tmp_path):
    # PEP 562: a module __getattr__ supplies the names; `from wavefit import analyze` works as before
    out = run_python("""
        import wavefit
        from wavefit import analyze
        from wavefit.analysis import analyze as defined
        from wavefit.fit.model_fit import fit_model
        print(analyze is defined, wavefit.fit_model is fit_model, "analyze" in dir(wavefit))
        try:
            wavefit.no_such_name
        except AttributeError as exc:
            print(exc)
    """, tmp_path)
    assert out.splitlines() == ["True True True", "module 'wavefit' has no attribute 'no_such_name'"]


@pytest.fixture
def rl_capture(tmp_path):
    """A short two-channel rl-step capture and its setup (the values do not matter here)."""
    rng = np.random.default_rng(5)
    tau = 100e-6 / 60.5
    t, drive, sense = rl_square_wave(100e-6, 0.5, 10.0, 50.0, 1.0, 20 * tau, 40 * tau / 4000, 40 * tau)
    pd.DataFrame({"Time (s)": t,
                  "CH1 (V)": ScopeModel(noise_rms=1e-3, bits=10, full_scale=(-1.0, 1.1)).apply(drive, rng),
                  "CH2 (V)": ScopeModel(noise_rms=2e-4, bits=10, full_scale=(-0.02, 0.2)).apply(sense, rng)},
                 ).to_csv(tmp_path / "c.csv", index=False, float_format="%.9g")
    (tmp_path / "setup.toml").write_text('method = "rl-step"\n[columns]\ntime = "Time (s)"\ndrive = "CH1"\n'
                                         'sense = "CH2"\n[parts]\nsense_resistor = "10 ohm ±0.1%"\n',
                                         encoding="utf-8")
    return tmp_path


#: numpy first, so that its BLAS pool is sized before wavefit could set the environment; the
#: pools' thread counts (threadpoolctl) are recorded inside the method's analysis, twice (the
#: second analysis limits the pools through the view of them the first one took).
NUMPY_FIRST = """
    import json
    import numpy
    from threadpoolctl import threadpool_info

    def blas_threads():
        return {pool["filepath"]: pool["num_threads"] for pool in threadpool_info() if pool["user_api"] == "blas"}

    before = blas_threads()
    import wavefit
    from wavefit.methods.base import Method

    during = []
    method_analyze = Method.analyze

    def recording(self, *args, **kwargs):
        during.append(blas_threads())
        return method_analyze(self, *args, **kwargs)

    Method.analyze = recording
    wavefit.analyze("c.csv", "setup.toml")
    between = blas_threads()
    wavefit.analyze("c.csv", "setup.toml")
    print(json.dumps({"before": before, "during": during, "between": between, "after": blas_threads()}))
"""


@pytest.mark.skipif((os.cpu_count() or 1) < 2, reason="BLAS starts with one thread on a single core")
def test_one_blas_thread_when_numpy_came_first(rl_capture):
    seen = json.loads(run_python(NUMPY_FIRST, rl_capture).splitlines()[-1])
    assert seen["before"] and all(n > 1 for n in seen["before"].values())  # so the check can fail
    assert len(seen["during"]) == 2
    for during in seen["during"]:
        assert set(during.values()) == {1}
    for library, threads in seen["before"].items():  # the caller's own setting is given back
        assert seen["between"][library] == seen["after"][library] == threads


@pytest.mark.skipif((os.cpu_count() or 1) < 2, reason="needs a thread count other than one to tell")
def test_thread_count_set_by_the_user_is_kept(rl_capture):
    seen = json.loads(run_python(NUMPY_FIRST, rl_capture, OPENBLAS_NUM_THREADS="2").splitlines()[-1])
    assert len(seen["during"]) == 2
    for during in seen["during"]:
        assert set(seen["before"].values()) == set(during.values()) == {2}
