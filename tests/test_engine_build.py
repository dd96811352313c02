"""The compiled event engine against its plain-Python source, and the choice between them.

``pip install`` compiles netsim/engine/des.py and policies.py with mypyc (netsim/_build/backend.py);
the plain sources are the reference. Both must give the same numbers to the last bit on the same
seeds: whole runs of bundled and generated networks (contention, shared fibres, communication
qubits, memory transfer, attempt dephasing, cut-offs, purification) and every link pair's
timeline. These comparisons run where the compiled build is installed and always under CI (whose
install must build it); elsewhere they are skipped, since plain against plain would prove nothing.
"""

from __future__ import annotations

import importlib.util
import json
import os
import shutil
import subprocess
import sys
import tomllib
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from netsim import qinfo
from netsim.engine import BUILD, Chain, DesOptions, HopSpec, StopRule, api, simulate_des
from netsim.engine import des as des_in_use
from netsim.engine.build import compiled_present, plain_engine, source_digest
from netsim.engine.chain import line_chain, synthetic_physics
from netsim.scenario import load, load_data
from netsim.scenario.model import Site

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests" / "benchmarks"))
from metro import grid_metro, metro_scenario  # noqa: E402

#: skipped where the compiled build is absent, except under CI, whose install must have built it
#: (the build falls back to plain Python silently; this makes CI notice)
compiled_only = pytest.mark.skipif(BUILD != "compiled" and not os.environ.get("CI"),
                                   reason="the compiled engine is not installed here "
                                   "(pip install -e . builds it where a C compiler is present)")
NODE_PHYSICS = {"communication_qubits": 1, "memory_transfer_s": 1e-4, "memory_transfer_error": 0.01,
                "attempt_dephasing": 1e-3}


def _purified(path: Path, method: str) -> Any:
    data = tomllib.loads(path.read_text())
    data["protocol"].update(purification=method, purification_rounds=1)
    return load_data(data, source=str(path))


def _networks() -> dict[str, Any]:
    return {
        "vellmoor-mesh": load(ROOT / "scenarios" / "vellmoor-mesh.toml"),
        "vellmoor-mesh-dejmps": _purified(ROOT / "scenarios" / "vellmoor-mesh.toml", "dejmps"),
        "chain3-bbpssw": _purified(ROOT / "scenarios" / "chain3.toml", "bbpssw"),
        "grid-4x4-node-physics": metro_scenario(grid_metro(4, 4, 8, 2, seed=3, physics=NODE_PHYSICS)),
    }


@compiled_only
@pytest.mark.parametrize("name", list(_networks()))
def test_compiled_engine_runs_exactly_as_its_source(name: str, monkeypatch: pytest.MonkeyPatch) -> None:
    scenario = _networks()[name]
    assert des_in_use.__file__ is not None and not des_in_use.__file__.endswith(".py")

    def result() -> str:
        out = api.run(scenario, pairs=60, seed=7, ensembles=False)
        assert all(d["engine"] == "des" for d in out.demands)  # the event engine ran, not the closed form
        return json.dumps(out.to_dict(), sort_keys=True)

    compiled = result()
    monkeypatch.setattr(api, "simulate_des", plain_engine().simulate_des)
    assert result() == compiled


@compiled_only
@pytest.mark.parametrize("purification", ["none", "dejmps"])
def test_compiled_engine_makes_the_same_link_pairs(purification: str) -> None:
    # Two demands through one hub with dephasing attempts, a lossy Bell measurement there, a
    # cut-off, with and without purification: every heralded link pair (hop, times, fate) and
    # every figure is the same in both builds.
    def site(name: str, role: str) -> Site:
        return Site(name, role, memory_slots=4 if role == "repeater" else 2, t1_s=1.0, t2_s=0.5,  # type: ignore[arg-type]
                    attempt_dephasing=0.01, communication_qubits=1, bsm_success_probability=0.7)

    hub, ends = site("Fenwick Hub", "repeater"), [site(n, "user") for n in ("Gale", "Holm", "Irby", "Jessop")]
    hop = synthetic_physics(0.1, 1e-4, qinfo.werner_state(0.9))
    chains = [Chain("Gale-Irby", (ends[0], hub, ends[2]), (HopSpec("g", hop), HopSpec("i", hop)), index=0),
              Chain("Holm-Jessop", (ends[1], hub, ends[3]), (HopSpec("h", hop), HopSpec("j", hop)), index=1)]
    options = DesOptions(purification=purification, purification_rounds=1, cutoff_s=1.5e-3, log_pairs=True)

    def timelines(module: Any) -> tuple[list[Any], list[Any]]:
        runs, logs = module.simulate_des(chains, StopRule(pairs=150),
                                         [np.random.default_rng(5), np.random.default_rng(6)], options)
        figures = [(r.metrics.n, r.metrics.sum_fidelity, r.metrics.sum_eof, r.simulated_time_s,
                    r.hop_attempts.tolist(), r.swap_failures.tolist(), r.site_qubit_s.tolist()) for r in runs]
        pairs = [[(p.hop, p.start, p.herald, list(p.end), p.fate) for p in log] for log in logs]
        return figures, pairs

    compiled = timelines(des_in_use)
    assert sum(len(log) for log in compiled[1]) > 500
    assert all(f[5][1] > 10 for f in compiled[0])  # failed swaps at the hub
    fates = {p[4] for log in compiled[1] for p in log}
    assert fates == ({"swapped", "swap_failed", "discarded"} if purification == "none" else {""})
    assert json.dumps(timelines(plain_engine())) == json.dumps(compiled)  # NaN (never ended) equals NaN here


@pytest.mark.parametrize("name", ["grid-4x4-node-physics", "vellmoor-mesh-dejmps"])
def test_the_engine_steps_simpy_as_simpy_does(name: str, monkeypatch: pytest.MonkeyPatch) -> None:
    # The compiled engine keeps its events on its own heap (des.OWN_QUEUE) and processes them
    # with simpy's queue in its own loop (_Des.step_until_finished). The same plain engine run
    # three ways must give the same run to the last bit: its events on its own heap, its events
    # on simpy's queue stepped by its loop, and its events on simpy's queue stepped by simpy's own
    # Environment.run(until=finished). Either way the events, their order (time, priority,
    # counter) and the handlers they call are simpy's.
    scenario = _networks()[name]
    plain = plain_engine()

    def result() -> str:
        out = api.run(scenario, pairs=40, seed=3, ensembles=False)
        return json.dumps(out.to_dict(), sort_keys=True)

    monkeypatch.setattr(api, "simulate_des", plain.simulate_des)
    on_heap: list[int] = []
    push = plain._push_call

    def counted_push(heap: list[Any], event: Any) -> None:
        on_heap.append(1)
        push(heap, event)

    monkeypatch.setattr(plain, "_push_call", counted_push)
    monkeypatch.setattr(plain, "OWN_QUEUE", True)
    own = result()
    assert len(on_heap) > 1000  # the engine's heap carried the run
    monkeypatch.setattr(plain, "OWN_QUEUE", False)
    assert result() == own
    stepped: list[int] = []

    def simpy_run(self: Any) -> None:
        assert not self.calls
        stepped.append(len(self.queue))
        self.env.run(until=self.finished)

    monkeypatch.setattr(plain._Des, "step_until_finished", simpy_run)
    assert result() == own
    assert stepped and stepped[0] > 0  # simpy's own loop ran the engine's events


def test_the_engines_heap_gives_events_in_simpys_order() -> None:
    # _push_call and _pop_call against a sort by (time, counter), as simpy orders events of one
    # priority: many ties in time, pushes and pops interleaved as in a run (every new event is
    # at or after the last one taken), times from arithmetic such as now + (t - now).
    des = plain_engine()
    rng = np.random.default_rng(11)
    heap: list[Any] = []
    waiting: list[tuple[float, int]] = []
    taken: list[tuple[float, int]] = []
    now, seq, largest = 0.0, 0, 0
    for step in range(4000):
        for _ in range(40 if step == 0 else int(rng.integers(0 if heap else 1, 3))):  # about 40 waiting
            when = now + float(rng.choice([0.0, 1e-9, 0.25, 0.5, rng.exponential()]))
            call = des._Call(None, print, (), when)
            call.seq = seq
            des._push_call(heap, call)
            waiting.append((when, seq))
            seq += 1
        largest = max(largest, len(heap))
        first = des._pop_call(heap)
        now = first.time
        taken.append((first.time, first.seq))
        expected = min(waiting)
        waiting.remove(expected)
        assert taken[-1] == expected
    while heap:
        first = des._pop_call(heap)
        taken.append((first.time, first.seq))
    assert taken == sorted(taken) and len(taken) == seq and len(set(taken)) == seq
    assert largest >= 40 and len({t for t, _ in taken}) < seq * 0.9  # a deep heap, many ties
    # and the merge with simpy's queue: a simpy entry (time, priority, counter, event) comes after
    # an engine event exactly when simpy's tuple order puts it after (time, NORMAL, seq)
    from simpy.events import NORMAL, URGENT

    for _ in range(500):
        call = des._Call(None, print, (), float(rng.choice([1.0, 2.0])))
        call.seq = int(rng.integers(0, 6))
        entry = (float(rng.choice([1.0, 2.0])), int(rng.choice([URGENT, NORMAL])), int(rng.integers(0, 6)), None)
        if entry[1] == NORMAL and entry[2] == call.seq:
            continue  # one counter value is never given twice
        assert des._simpy_later(entry, call) == (entry[:3] > (call.time, NORMAL, call.seq))


def _build_in(tree: Path, env: dict[str, str] | None = None) -> list[str]:
    out = subprocess.run([sys.executable, "-c", "import netsim.engine as e, netsim.engine.des as d, "
                          "netsim.engine.policies as p; print(e.BUILD, d.__file__, p.__file__)"],
                         cwd=tree, env={**os.environ, "PYTHONPATH": str(tree), **(env or {})},
                         capture_output=True, text=True, check=True)
    return out.stdout.split()


@pytest.mark.skipif(not compiled_present(), reason="no compiled engine installed here")
def test_edited_sources_run_as_plain_python(tmp_path: Path) -> None:
    # A compiled module wins over its source at import: after an edit of des.py the compiled file
    # no longer matches its recorded digest and the plain sources must run instead.
    package = Path(des_in_use.__file__).resolve().parents[2]
    tree = tmp_path / "tree"
    shutil.copytree(package / "netsim", tree / "netsim", ignore=shutil.ignore_patterns("__pycache__"))
    assert _build_in(tree)[0] == "compiled"
    build, des_file, policies_file = _build_in(tree, {"NETSIM_PURE_PYTHON": "1"})
    assert (build, des_file.endswith("des.py"), policies_file.endswith("policies.py")) == ("python", True, True)
    source = tree / "netsim" / "engine" / "des.py"
    source.write_text(source.read_text() + "\n# an edit\n")
    build, des_file, policies_file = _build_in(tree)
    assert (build, des_file.endswith("des.py"), policies_file.endswith("policies.py")) == ("python", True, True)


def test_build_backend_digests_the_same_sources() -> None:
    # The build backend records the digest that netsim.engine.build checks: the two must hash the
    # same files in the same order.
    spec = importlib.util.spec_from_file_location("netsim_build_backend", ROOT / "netsim" / "_build" / "backend.py")
    assert spec is not None and spec.loader is not None
    backend = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(backend)
    assert backend.source_digest(ROOT) == source_digest()
    assert [p.replace("/", ".").removesuffix(".py") for p in backend.NATIVE] == ["netsim.engine.policies",
                                                                                  "netsim.engine.des"]


def test_numpy_values_and_tuples_run_as_plain_ones() -> None:
    # A compiled class checks its declared types exactly (a numpy integer is not an int there);
    # the engine's entry point takes numpy numbers and any sequences, as plain Python always did,
    # and gives the same run (invariant of the implementation).
    chain = line_chain(2, 0.2, 1e-3, qinfo.werner_state(0.9), t1_s=0.5, t2_s=0.2, length_km=5.0)
    plain = simulate_des([chain], StopRule(pairs=40), [np.random.default_rng(2)],
                         DesOptions(cutoff_s=0.02, purification="bbpssw", purification_rounds=1),
                         {s.name: 4 for s in chain.sites})
    numpy_typed = simulate_des((chain,), (StopRule(pairs=40),), (np.random.default_rng(2),),
                               DesOptions(cutoff_s=np.float64(0.02), purification="bbpssw",
                                          purification_rounds=np.int64(1), log_pairs=np.bool_(False)),
                               {s.name: np.int64(4) for s in chain.sites})
    assert json.dumps(_figures(numpy_typed[0])) == json.dumps(_figures(plain[0]))


def _figures(runs: list[Any]) -> list[Any]:
    return [(r.metrics.n, r.metrics.sum_fidelity, r.simulated_time_s, r.hop_attempts.tolist()) for r in runs]


@pytest.mark.skipif(shutil.which("gcc") is None and shutil.which("cc") is None, reason="no C compiler here")
def test_a_failed_compile_leaves_no_digest(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # A compiled module that fails to build is skipped with a warning, and an editable build keeps
    # the file of the previous build in place. The digest must then go: written beside that old
    # file, it would make the old engine run as if it were the edited one (seen in development).
    from setuptools import Distribution, Extension

    spec = importlib.util.spec_from_file_location("netsim_build_backend", ROOT / "netsim" / "_build" / "backend.py")
    assert spec is not None and spec.loader is not None
    backend = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(backend)
    package = tmp_path / "pkg"
    package.mkdir()
    (package / "__init__.py").write_text("")
    (package / "good.c").write_text('#include <Python.h>\nstatic struct PyModuleDef m = {PyModuleDef_HEAD_INIT, "good", 0, -1, 0};\n'
                                    "PyMODINIT_FUNC PyInit_good(void) { return PyModule_Create(&m); }\n")
    (package / "bad.c").write_text("this is not C\n")
    monkeypatch.chdir(tmp_path)

    def build(source: str) -> list[str]:
        dist = Distribution({"name": "pkg", "packages": ["pkg"],
                             "ext_modules": [Extension("pkg.good", [source], optional=True)]})
        command = backend._BuildWithDigest(dist)
        command.inplace, command.force = True, True
        command.ensure_finalized()
        command.run()
        return sorted(path.name for path in package.iterdir() if path.suffix in (".so", ".pyd", ".sha256"))

    first = build("pkg/good.c")
    assert backend.DIGEST_FILE in first and len(first) == 2
    assert build("pkg/bad.c") == [name for name in first if name != backend.DIGEST_FILE]  # the old module stays
    assert backend.DIGEST_FILE in build("pkg/good.c")
