"""Ctrl-C in the first second of a sweep: no traceback from the workers or the coordinator.

Reproduces the hardening report (Ctrl-C early in `netsim sweep` sometimes printed the workers'
`KeyboardInterrupt` tracebacks, 3 of 5 in one series): a real `python -m netsim sweep` with two
worker processes gets SIGINT on its whole process group, as a terminal's Ctrl-C does, at several
moments of its first second, while it imports, plans, opens its store, starts the fork server
and the workers, and runs its first points. Every time stderr holds no traceback, the exit is
the interrupted one, and the store is sound; a last uninterrupted run resumes it to the end.

The moments count from the interpreter being ready to run netsim (a byte written by the first
statement of the bootstrap): the interpreter's own start-up (site-packages and their .pth
files) is no netsim code and takes a machine-dependent time before it.

Outside references: POSIX signal semantics (IEEE Std 1003.1: a terminal's interrupt goes to the
whole foreground process group; a signal ignored before exec stays ignored in the new image),
the Python documentation (signal module: Python installs its KeyboardInterrupt handler only if
SIGINT is not ignored at start-up), exit status 128 + 2 = 130 after SIGINT (common practice).
"""

from __future__ import annotations

import importlib
import os
import signal
import subprocess
import sys
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path
from typing import Any

import pytest
from test_sweep_support import write_scenario

from netsim.interrupts import interrupt_deferred, interrupt_guarded
from netsim.scenario import load
from netsim.sweep import executors
from netsim.sweep.executors import LocalPool
from netsim.sweep.plan import make_plan
from netsim.sweep.runner import tasks_for
from netsim.sweep.store import open_store
from netsim.sweep.synthetic import SyntheticPoint

ROOT = Path(__file__).resolve().parents[1]
SWEEP = '[sweep]\npairs = 20\n[sweep.vary]\n"links[*].length_km" = "lin:2:30:8"\n'   # 8 engine points
BOOT = ("import os, runpy, sys; fd = int(sys.argv[1]); os.write(fd, b'1'); os.close(fd); "
        "sys.argv = ['netsim', *sys.argv[2:]]; runpy.run_module('netsim', run_name='__main__', alter_sys=True)")
MOMENTS_S = (0.1, 0.3, 0.6, 1.0)


def _children(pid: int) -> list[int]:
    try:
        text = Path(f"/proc/{pid}/task/{pid}/children").read_text()
    except OSError:
        return []
    return [int(p) for p in text.split()]


def _sweep(scenario: Path, store: Path, interrupt_after_s: float | None,
           after_children: bool = False) -> tuple[int, str]:
    ready_r, ready_w = os.pipe()
    process = subprocess.Popen(
        [sys.executable, "-c", BOOT, str(ready_w), "sweep", str(scenario), "--store", str(store), "--workers", "2",
         "--quiet"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, pass_fds=(ready_w,), start_new_session=True,
        env={**os.environ, "PYTHONPATH": str(ROOT)})
    os.close(ready_w)
    try:
        os.read(ready_r, 1)
    finally:
        os.close(ready_r)
    if after_children:  # count from the first helper process (the fork server) appearing
        end = time.monotonic() + 60
        while not _children(process.pid) and process.poll() is None and time.monotonic() < end:
            time.sleep(0.002)
    if interrupt_after_s is not None:
        time.sleep(interrupt_after_s)
        os.killpg(process.pid, signal.SIGINT)
    _, err = process.communicate(timeout=300)
    return process.returncode, err.decode(errors="replace")


def test_ctrl_c_in_the_first_second_prints_no_traceback(tmp_path: Path) -> None:
    scenario, store = write_scenario(tmp_path, SWEEP), tmp_path / "sweep.sqlite"
    outcomes = []
    for moment in MOMENTS_S:
        code, err = _sweep(scenario, store, moment)
        outcomes.append((moment, code))
        assert "Traceback" not in err and "KeyboardInterrupt" not in err, f"SIGINT at {moment} s:\n{err}"
        # interrupted (130), or finished before the signal arrived (0); a Python that dies of the
        # signal itself after its last line reports -SIGINT
        assert code in (0, 130, -signal.SIGINT), (moment, code, err)
        if code == 130:
            assert "interrupted" in err.strip().splitlines()[-1]
        if store.exists():
            with open_store(store) as opened:     # sound: whole points only
                assert sum(opened.counts().values()) in (0, 8)
    print("exit codes by moment:", outcomes)
    code, err = _sweep(scenario, store, None)       # resume to the end
    assert code == 0, err
    with open_store(store) as opened:
        assert opened.counts() == {"pending": 0, "done": 8, "failed": 0}


@pytest.mark.skipif(not Path(f"/proc/{os.getpid()}/task/{os.getpid()}/children").exists(),
                    reason="needs Linux /proc to see the worker processes start")
def test_ctrl_c_while_the_workers_start_prints_no_traceback(tmp_path: Path) -> None:
    """The moments the report was about: the fork server importing numpy and the workers
    starting, before the pool initializer runs in them."""
    scenario, store = write_scenario(tmp_path, SWEEP), tmp_path / "sweep.sqlite"
    for moment in (0.0, 0.05, 0.1, 0.2):
        code, err = _sweep(scenario, store, moment, after_children=True)
        assert "Traceback" not in err and "KeyboardInterrupt" not in err, f"SIGINT {moment} s after start:\n{err}"
        assert code in (0, 130, -signal.SIGINT), (moment, code, err)
    code, err = _sweep(scenario, store, None)
    assert code == 0, err
    with open_store(store) as opened:
        assert opened.counts() == {"pending": 0, "done": 8, "failed": 0}


def test_ctrl_c_while_the_commands_load_is_one_line(monkeypatch: pytest.MonkeyPatch,
                                                     capsys: pytest.CaptureFixture[str]) -> None:
    """A Ctrl-C that lands inside a C extension's import comes out as an ImportError, not as
    KeyboardInterrupt (seen in this project's own run: numpy 2.4's import of the datetime capsule,
    SIGINT 0.1 s into `netsim sweep` on a slow host, printed two pages of traceback). The command
    line holds Ctrl-C while its commands' modules load, then stops with its one line and 130.
    The stand-in below does what that import did with the signal."""
    import netsim.cli as cli

    real = cli.build_parser

    def loading() -> Any:
        try:
            signal.raise_signal(signal.SIGINT)
            time.sleep(0.05)                    # the eval loop runs its signal checks meanwhile
        except KeyboardInterrupt:
            raise ImportError('PyCapsule_Import could not import module "datetime"') from None
        return real()

    monkeypatch.setattr(cli, "build_parser", loading)
    assert cli.main(["budget", "no-such-file.toml"]) == 130
    assert capsys.readouterr().err.strip() == "netsim: interrupted"


def test_a_deferred_ctrl_c_is_raised_when_the_block_ends() -> None:
    handler = signal.getsignal(signal.SIGINT)
    reached_the_end = False
    with pytest.raises(KeyboardInterrupt):
        with interrupt_deferred():
            signal.raise_signal(signal.SIGINT)
            time.sleep(0.05)                    # the eval loop runs its signal checks meanwhile
            reached_the_end = True
    assert reached_the_end
    assert signal.getsignal(signal.SIGINT) is handler
    with interrupt_deferred():                  # no Ctrl-C: nothing is raised
        pass


def _command_line_running(monkeypatch: pytest.MonkeyPatch, func: Any) -> Any:
    """``netsim.cli`` with its parser replaced by one whose ``budget`` command runs ``func``."""
    import netsim.cli as cli

    def parser() -> Any:
        top = cli.OneLineParser(prog="netsim")
        sub = top.add_subparsers(dest="command")
        sub.add_parser("budget").set_defaults(func=func)
        return top

    monkeypatch.setattr(cli, "build_parser", parser)
    return cli


def test_ctrl_c_that_lands_where_python_cannot_raise_it_still_stops_the_command(
        monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    """Seen in this project's CI: SIGINT 1.0 s into `netsim sweep` ran Python's handler inside the
    weak-reference callback with which the import system drops a module lock. A KeyboardInterrupt
    raised there cannot propagate: Python printed "Exception ignored in ..." with a traceback and
    the sweep ran on. Here a weak-reference callback of the command's own takes the signal; the
    command must stop with its one line and 130 all the same (Python documentation: exceptions
    in weak-reference callbacks go to sys.unraisablehook)."""
    import weakref

    class Thing:
        pass

    def callback(_ref: Any) -> None:
        signal.raise_signal(signal.SIGINT)
        time.sleep(0.05)                        # the handler runs here, where it cannot raise

    reached: list[str] = []

    def command(args: Any) -> int:
        thing = Thing()
        ref = weakref.ref(thing, callback)
        del thing                               # the callback runs now
        reached.append("after the callback")
        end = time.monotonic() + 5
        while time.monotonic() < end:           # the Ctrl-C must arrive here, well before the end
            time.sleep(0.01)
        reached.append("the end")
        return 0 if ref() is None else 1

    cli = _command_line_running(monkeypatch, command)
    assert cli.main(["budget"]) == 130
    assert reached == ["after the callback"]
    err = capsys.readouterr().err
    assert "Exception ignored" not in err and "Traceback" not in err
    assert err.strip().startswith("netsim budget: interrupted")
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler


def test_ctrl_c_inside_an_import_is_raised_once_the_import_has_ended(tmp_path: Path,
                                                                     monkeypatch: pytest.MonkeyPatch) -> None:
    """A module whose import takes the signal in its own code: under the guard the import ends
    whole (a C extension interrupted in its import would raise ImportError instead, see above)
    and the KeyboardInterrupt comes right after it."""
    (tmp_path / "slow_to_import.py").write_text(
        "import signal, time\nsignal.raise_signal(signal.SIGINT)\ntime.sleep(0.05)\nFINISHED = True\n")
    monkeypatch.syspath_prepend(str(tmp_path))
    monkeypatch.delitem(sys.modules, "slow_to_import", raising=False)
    start = time.monotonic()
    with pytest.raises(KeyboardInterrupt):
        with interrupt_guarded():
            import slow_to_import
            assert slow_to_import.FINISHED
            time.sleep(5)                       # the Ctrl-C arrives here, and wakes the sleep
    assert time.monotonic() - start < 2.5, "the Ctrl-C held during the import waited for the sleep to end"
    with pytest.raises(KeyboardInterrupt):      # held until the block ends: raised as it ends
        with interrupt_guarded():
            importlib.reload(sys.modules["slow_to_import"])
    with interrupt_guarded():                   # no Ctrl-C: nothing is raised
        pass
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler


def _forkserver_children() -> set[int]:
    from multiprocessing import forkserver

    pid = getattr(forkserver._forkserver, "_forkserver_pid", None)  # the server forks the workers: they are its children
    return set(_children(pid)) if pid else set()


@pytest.mark.skipif(not sys.platform.startswith("linux") or
                    not Path(f"/proc/{os.getpid()}/task/{os.getpid()}/children").exists(),
                    reason="needs the Linux fork server and /proc to see its children")
def test_ctrl_c_while_a_worker_is_being_started_leaves_no_unknown_worker(tmp_path: Path,
                                                                         monkeypatch: pytest.MonkeyPatch) -> None:
    """Ctrl-C while the coordinator waits for the fork server to report a new worker's pid (the
    worker exists and holds the queues' semaphore names, the pool does not know it yet): the
    pool must know and end that worker when it stops, else the worker outlives the coordinator's
    semaphores and prints a FileNotFoundError traceback."""
    from multiprocessing import forkserver

    plan = make_plan(load(write_scenario(tmp_path, SWEEP)))
    pool = LocalPool(SyntheticPoint(sleep_s=5.0), 2)
    before = _forkserver_children()
    read_signed, stop = forkserver.read_signed, executors._stop
    forked: set[int] = set()
    known: list[int] = []

    def interrupted_read_signed(fd: int) -> int:
        if not forked:                          # the first pid wait: Ctrl-C once the worker exists
            end = time.monotonic() + 60
            while not forked and time.monotonic() < end:
                forked.update(_forkserver_children() - before)
                time.sleep(0.005)
            signal.raise_signal(signal.SIGINT)
        return read_signed(fd)

    def recording_stop(pool: ProcessPoolExecutor) -> None:
        known.extend(getattr(pool, "_processes", None) or {})
        stop(pool)

    monkeypatch.setattr(forkserver, "read_signed", interrupted_read_signed)
    monkeypatch.setattr(executors, "_stop", recording_stop)
    records = pool.run(tasks_for(plan, plan.points, None))
    with pytest.raises(KeyboardInterrupt):
        next(records)
    records.close()
    monkeypatch.undo()
    assert forked, "the fork server started no worker"
    assert forked <= set(known), f"workers the pool did not know when it stopped: {forked - set(known)}"
    assert not forked & _forkserver_children(), "a worker outlived the pool"
