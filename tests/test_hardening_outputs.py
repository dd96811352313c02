"""Output paths: an existing file as --out, --out below a file, --out in a read-only directory.

Each case reproduces a report of the hardening issue (a `FileExistsError`, `NotADirectoryError`
or `PermissionError` traceback) and asserts the promised refusal: exit code 2, one line on
stderr naming the option, the path and what is allowed, no traceback.

Outside references: POSIX file semantics (IEEE Std 1003.1: a regular file cannot hold directory
entries, ENOTDIR; a directory without write permission refuses new entries, EACCES, except to
the superuser) and the command-line convention of exit code 2 for a usage error (common practice).
"""

from __future__ import annotations

import errno
import os
import stat
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path

import pytest

from netsim.cli import main

ROOT = Path(__file__).resolve().parents[1]
CHAIN3 = ROOT / "scenarios" / "chain3.toml"
TARROWBY = ROOT / "scenarios" / "tarrowby"
IS_ROOT = hasattr(os, "geteuid") and os.geteuid() == 0


@pytest.fixture(scope="module")
def design_scenario(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A scenario with candidate sites and links (the bundled invented fibre map, imported)."""
    out = tmp_path_factory.mktemp("design") / "tarrowby.toml"
    assert main(["import", str(TARROWBY / "fibre.geojson"), "--with", str(TARROWBY / "plan.toml"),
                 "--out", str(out)]) == 0
    return out


def _commands(out: str, design: Path, run_json: Path) -> dict[str, list[str]]:
    """Every command with an output path option, given ``out`` for it."""
    return {
        "run": ["run", str(CHAIN3), "--pairs", "5", "--out", out],
        "report": ["report", str(run_json), "--no-figures", "--out", out],
        "compare": ["compare", str(CHAIN3), str(CHAIN3), "--no-simulate", "--out", out],
        "design": ["design", str(design), "--no-simulate", "--out", out],
        "sensitivity": ["sensitivity", str(CHAIN3), "--samples", "8", "--no-figures", "--out", out],
        "import": ["import", str(TARROWBY / "fibre.geojson"), "--out", out],
        "sweep": ["sweep", str(CHAIN3), "--vary", "links[*].length_km=5,10", "--pairs", "5", "--store", out],
    }


@pytest.fixture(scope="module")
def run_json(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A small run result to report on (written by netsim run itself)."""
    out = tmp_path_factory.mktemp("run")
    assert main(["run", str(CHAIN3), "--pairs", "5", "--out", str(out), "--format", "csv"]) == 0
    return out / "run.json"


def _one_line_refusal(capsys: pytest.CaptureFixture[str], argv: list[str], option: str, path: str) -> str:
    code = main(argv)
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2, err
    assert len(err) == 1, err
    assert "Traceback" not in err[0]
    assert f"{option} = {path!r} is not allowed; expected" in err[0], err[0]
    return err[0]


COMMANDS = ("run", "report", "compare", "design", "sensitivity", "import", "sweep")
OPTION = {"sweep": "--store"}


@pytest.mark.parametrize("command", COMMANDS)
def test_out_is_an_existing_file(command: str, tmp_path: Path, design_scenario: Path, run_json: Path,
                                 capsys: pytest.CaptureFixture[str]) -> None:
    target = tmp_path / "afile"
    target.write_text("earlier notes\n", encoding="utf-8")
    argv = _commands(str(target), design_scenario, run_json)[command]
    if command in ("import", "sweep"):  # file options: here a directory in the file's place is the error
        target.unlink()
        target.mkdir()
        line = _one_line_refusal(capsys, argv, OPTION.get(command, "--out"), str(target))
        assert "existing directory" in line
        return
    line = _one_line_refusal(capsys, argv, "--out", str(target))
    assert "existing file" in line
    assert target.read_text(encoding="utf-8") == "earlier notes\n"  # left alone


@pytest.mark.parametrize("command", COMMANDS)
def test_out_below_a_file(command: str, tmp_path: Path, design_scenario: Path, run_json: Path,
                          capsys: pytest.CaptureFixture[str]) -> None:
    (tmp_path / "afile").write_text("x", encoding="utf-8")
    target = str(tmp_path / "afile" / "sub")
    argv = _commands(target, design_scenario, run_json)[command]
    given = argv[argv.index(OPTION.get(command, "--out")) + 1]
    line = _one_line_refusal(capsys, argv, OPTION.get(command, "--out"), given)
    assert "is a file, not a directory" in line


@pytest.fixture
def read_only_dir(tmp_path: Path) -> Iterator[Path]:
    directory = tmp_path / "locked"
    directory.mkdir()
    directory.chmod(stat.S_IRUSR | stat.S_IXUSR)
    yield directory
    directory.chmod(stat.S_IRWXU)


@pytest.mark.skipif(IS_ROOT, reason="the superuser writes into read-only directories (POSIX); "
                                    "the simulated test below covers this path")
@pytest.mark.parametrize("command", COMMANDS)
def test_out_inside_a_read_only_directory(command: str, read_only_dir: Path, design_scenario: Path,
                                          run_json: Path, capsys: pytest.CaptureFixture[str]) -> None:
    argv = _commands(str(read_only_dir / "sub"), design_scenario, run_json)[command]
    given = argv[argv.index(OPTION.get(command, "--out")) + 1]
    line = _one_line_refusal(capsys, argv, OPTION.get(command, "--out"), given)
    assert "not writable" in line


@pytest.mark.parametrize("command", COMMANDS)
def test_read_only_directory_simulated(command: str, tmp_path: Path, design_scenario: Path, run_json: Path,
                                       capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch) -> None:
    """The same refusal when the permission check says no (so it is tested as root too)."""
    locked = tmp_path / "locked"
    locked.mkdir()
    real_access = os.access
    monkeypatch.setattr(os, "access", lambda p, mode, **kw: False if Path(p) == locked else real_access(p, mode, **kw))
    argv = _commands(str(locked / "sub"), design_scenario, run_json)[command]
    given = argv[argv.index(OPTION.get(command, "--out")) + 1]
    line = _one_line_refusal(capsys, argv, OPTION.get(command, "--out"), given)
    assert f"{locked} is not writable" in line


def test_a_failing_write_is_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                     monkeypatch: pytest.MonkeyPatch) -> None:
    """An OSError the checks cannot foresee (here EACCES from writing the file, as a read-only
    directory gives the superuser on a read-only mount) is mapped to one line too."""
    def refuse(self: Path, *args: object, **kwargs: object) -> int:
        raise PermissionError(errno.EACCES, "Permission denied", str(self))

    monkeypatch.setattr(Path, "write_text", refuse)
    out = tmp_path / "map.toml"
    line = _one_line_refusal(capsys, ["import", str(TARROWBY / "fibre.geojson"), "--out", str(out)],
                             "--out", str(out))
    assert "permission denied" in line


def test_a_failing_run_write_is_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                         monkeypatch: pytest.MonkeyPatch) -> None:
    from netsim.engine.result import RunResult

    def refuse(self: object, directory: object) -> list[Path]:
        raise OSError(errno.EROFS, "Read-only file system", str(Path(str(directory)) / "run.json"))

    monkeypatch.setattr(RunResult, "write", refuse)
    out = tmp_path / "r"
    line = _one_line_refusal(capsys, ["run", str(CHAIN3), "--pairs", "5", "--out", str(out), "--format", "csv"],
                             "--out", str(out))
    assert "read-only file system" in line and "run.json" in line


def test_subprocess_exit_code_and_no_traceback(tmp_path: Path) -> None:
    """The reported reproducer end to end: `netsim run ... --out FILE` as a process."""
    target = tmp_path / "afile"
    target.write_text("x", encoding="utf-8")
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.run([sys.executable, "-m", "netsim", "run", str(CHAIN3), "--pairs", "5", "--out", str(target)],
                          capture_output=True, text=True, env=env, timeout=300)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr and len(proc.stderr.strip().splitlines()) == 1, proc.stderr
