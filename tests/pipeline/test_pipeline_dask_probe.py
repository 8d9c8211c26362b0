"""The Dask address is probed before any work: nothing listening, a silent service, a
service that is not Dask and a real Dask greeting are told apart within the timeout.

The fake services are plain sockets in threads of this process; the real greeting is
checked by the executor test, which runs a job against a real scheduler's address.
"""

from __future__ import annotations

import socket
import struct
import threading
import time

import pytest

from maasscomp.cli import main
from maasscomp.errors import InputError
from maasscomp.pipeline.executors import probe_dask_scheduler


class _Server:
    """Accept connections on 127.0.0.1 and answer each with ``greeting`` (or nothing)."""

    def __init__(self, greeting: bytes | None) -> None:
        self.sock = socket.socket()
        self.sock.bind(("127.0.0.1", 0))
        self.sock.listen(8)
        self.port = self.sock.getsockname()[1]
        self.greeting = greeting
        self.conns: list[socket.socket] = []
        self.thread = threading.Thread(target=self._serve, daemon=True)
        self.thread.start()

    def _serve(self) -> None:
        while True:
            try:
                c, _ = self.sock.accept()
            except OSError:
                return
            self.conns.append(c)
            if self.greeting is not None:
                c.sendall(self.greeting)

    def close(self) -> None:
        self.sock.close()
        for c in self.conns:
            c.close()


@pytest.fixture
def server(request):
    s = _Server(request.param)
    yield s
    s.close()


@pytest.mark.parametrize("server", [None], indirect=True)
def test_silent_service_is_told_apart_within_the_timeout(server):
    t = time.monotonic()
    with pytest.raises(InputError, match="sent nothing within 2 s; a Dask scheduler greets at once"):
        probe_dask_scheduler(f"tcp://127.0.0.1:{server.port}", timeout=2.0)
    assert time.monotonic() - t < 2.0 + 1.0


@pytest.mark.parametrize("server", [b"HTTP/1.1 400 Bad Request\r\n\r\n", b"SSH-2.0-OpenSSH_9.0\r\n"],
                         indirect=True, ids=["http", "ssh"])
def test_other_services_are_named(server):
    with pytest.raises(InputError, match="is not a Dask scheduler \\(it answered '(HTTP/1.1 400|SSH-2.0)"):
        probe_dask_scheduler(f"127.0.0.1:{server.port}", timeout=5.0)


@pytest.mark.parametrize("server", [struct.pack("<QQQ", 8 + 8 + 40, 1, 40) + b"x" * 40],
                         indirect=True, ids=["dask-frame"])
def test_a_dask_style_greeting_passes(server):
    probe_dask_scheduler(f"tcp://127.0.0.1:{server.port}", timeout=5.0)


@pytest.mark.parametrize("server", [struct.pack("<QQ", 2**61, 1)], indirect=True, ids=["huge-frame"])
def test_an_absurd_frame_length_is_refused(server):
    # a Dask client would try to allocate 2^61 bytes for this frame
    with pytest.raises(InputError, match="is not a Dask scheduler"):
        probe_dask_scheduler(f"tcp://127.0.0.1:{server.port}", timeout=5.0)


def test_nothing_listening():
    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    port = s.getsockname()[1]
    s.close()
    with pytest.raises(InputError, match="nothing listens at 127.0.0.1:.*connection refused"):
        probe_dask_scheduler(f"tcp://127.0.0.1:{port}", timeout=5.0)


@pytest.mark.parametrize("server", [b"HTTP/1.1 400 Bad Request\r\n\r\n"], indirect=True)
def test_check_and_run_refuse_a_non_dask_address_in_one_line(server, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    cfg = tmp_path / "job.toml"
    cfg.write_text(f"""[job]
output = "out.h5"
[search]
levels = [1]
R_min = 9.4
R_max = 9.7
[executor]
backend = "dask"
address = "tcp://127.0.0.1:{server.port}"
""")
    for command in ("check", "run"):
        assert main([command, str(cfg)]) == 2
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and "is not a Dask scheduler" in err and "Traceback" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["job.toml"]
