"""Bad and dead Dask scheduler addresses given to `netsim sweep --cluster`.

Reproduces the hardening report (`--cluster 'nonsense::::'` and `--cluster tcp://` gave a
`ValueError` from Dask) and checks the class by fuzzing: any text is either a well-formed
address or a one-line refusal, never another exception; a well-formed address nobody answers
at is refused in one line after a short time-out, before the store is created.

Outside references: a TCP port is a 16-bit number and 0 is reserved, so ports run 1-65535
(RFC 793, 1981; RFC 6335, 2011); Dask's scheduler listens on port 8786 by default and its
addresses are written SCHEME://HOST:PORT with IPv6 hosts in brackets (Dask distributed
documentation, "Communications"; memory); exit code 2 for unusable input (common practice).
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from netsim.cli import main
from netsim.errors import ParameterError
from netsim.sweep import executors
from netsim.sweep.executors import parse_cluster

ROOT = Path(__file__).resolve().parents[1]
CHAIN3 = ROOT / "scenarios" / "chain3.toml"


def _sweep(tmp_path: Path, address: str) -> list[str]:
    return ["sweep", str(CHAIN3), "--vary", "links[*].length_km=5,10", "--pairs", "5",
            "--store", str(tmp_path / "s.sqlite"), "--cluster", address, "--quiet"]


@pytest.mark.parametrize("address", ["nonsense::::", "tcp://", "tcp://host:0", "tcp://host:65536",
                                     "ftp://host:21", "tcp://host:port", "tcp:// host:8786", "", "local:0",
                                     "local:", "tcp://[::1:8786", "tcp://-bad-:8786", "tcp://a..b:1:2"])
def test_malformed_addresses_are_one_line(address: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code = main(_sweep(tmp_path, address))
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "Traceback" not in err[0], err
    assert err[0].startswith(f"netsim sweep: error: --cluster = {address!r} is not allowed; expected local:N")
    assert not (tmp_path / "s.sqlite").exists()


def test_reported_reproducer_as_a_process(tmp_path: Path) -> None:
    proc = subprocess.run([sys.executable, "-m", "netsim", *_sweep(tmp_path, "nonsense::::")], capture_output=True,
                          text=True, timeout=300, env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert proc.returncode == 2 and "Traceback" not in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1, proc.stderr


@pytest.mark.parametrize(("address", "normalised"), [
    ("tcp://10.0.0.5:8786", "tcp://10.0.0.5:8786"),
    ("10.0.0.5", "tcp://10.0.0.5:8786"),                       # Dask's default scheme and port (memory)
    ("sched-1.example.org:9000", "tcp://sched-1.example.org:9000"),
    ("tls://[2001:db8::1]:8786", "tls://[2001:db8::1]:8786"),
    ("tcp://h:1", "tcp://h:1"), ("tcp://h:65535", "tcp://h:65535"),   # the ends of the port range
])
def test_well_formed_addresses(address: str, normalised: str) -> None:
    assert parse_cluster(address) == (normalised, None)


def test_local_cluster_sizes() -> None:
    assert parse_cluster("local:1") == ("local", 1) and parse_cluster("local:1024") == ("local", 1024)
    with pytest.raises(ParameterError, match="local:N with N in"):
        parse_cluster("local:1025")


@settings(max_examples=300, deadline=None)
@given(st.text(max_size=40) | st.from_regex(r"(tcp|tls|ws|ftp)?(://)?[a-z0-9.:\[\]-]{0,20}(:[0-9]{0,6})?",
                                             fullmatch=True))
def test_any_text_is_an_address_or_a_one_line_refusal(text: str) -> None:
    try:
        address, workers = parse_cluster(text)
    except ParameterError as exc:
        assert "\n" not in str(exc) and str(exc).startswith("--cluster = ")
        return
    if workers is not None:
        assert address == "local" and 1 <= workers <= 1024
        return
    scheme, _, rest = address.partition("://")
    port = int(rest.rsplit(":", 1)[1])
    assert scheme in executors.CLUSTER_SCHEMES and 1 <= port <= 65535


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def test_dead_scheduler_is_one_line_after_a_short_wait(tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                                       monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(executors, "CONNECT_TIMEOUT_S", 1.0)
    address = f"tcp://127.0.0.1:{_free_port()}"
    code = main(_sweep(tmp_path, address))
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "Traceback" not in err[0], err
    assert f"--cluster = {address!r} is not allowed; expected a Dask scheduler that answers within 1 s" in err[0]
    assert not (tmp_path / "s.sqlite").exists()  # refused before the store is touched
