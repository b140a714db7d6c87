"""``acquire sim`` as a user runs it: resource string first, served until Ctrl-C (SIGINT)."""

from __future__ import annotations

import os
import signal
import subprocess
import sys

import pyvisa


def start(*args: str) -> subprocess.Popen:
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    return subprocess.Popen(
        [sys.executable, "-m", "acquire", "sim", "--port", "0", *args],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env=env,
    )


def stop(proc: subprocess.Popen) -> tuple[int, str, str]:
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=20)
    return proc.returncode, out, err


def test_serves_prints_resource_first_and_stops_on_ctrl_c():
    proc = start("--profile", "rf-coil", "--fixture", "direct", "--no-noise", "--measure-time", "0")
    try:
        resource = proc.stdout.readline().strip()
        assert resource.startswith("TCPIP0::127.0.0.1::") and resource.endswith("::SOCKET")
        rm = pyvisa.ResourceManager("@py")
        inst = rm.open_resource(resource, read_termination="\n", write_termination="\n")
        inst.timeout = 5000
        assert inst.query("*IDN?").startswith("coil-acquire,")
        assert inst.query("SIM:DUT?;SIM:FIXT?;SIM:NOIS?") == '"rf-coil";"direct";0'
        inst.close()
        rm.close()
    finally:
        code, out, err = stop(proc)
    assert code == 0
    assert out == ""  # nothing on stdout but the resource line
    assert "rf-coil on direct" in err and "stopped" in err and "client" in err


def test_other_host_warns():
    # 127.0.0.2 is still loopback (nothing leaves the machine) but not the default address.
    proc = start("--host", "127.0.0.2", "--quiet")
    try:
        assert proc.stdout.readline().startswith("TCPIP0::127.0.0.2::")
    finally:
        code, _, err = stop(proc)
    assert code == 0 and "warning: listening on 127.0.0.2" in err


def test_bad_profile_is_one_line_and_exit_2():
    proc = subprocess.run(
        [sys.executable, "-m", "acquire", "sim", "--profile", "no-such-coil"],
        capture_output=True,
        text=True,
        timeout=30,
    )
    assert proc.returncode == 2
    assert proc.stdout == ""
    assert proc.stderr.startswith("acquire sim: error: no shipped profile named 'no-such-coil'")


def test_busy_port_is_one_line_and_exit_2():
    proc = start("--quiet")
    try:
        port = proc.stdout.readline().strip().split("::")[2]
        busy = subprocess.run(
            [sys.executable, "-m", "acquire", "sim", "--port", port],
            capture_output=True,
            text=True,
            timeout=30,
        )
    finally:
        stop(proc)
    assert busy.returncode == 2
    assert busy.stdout == ""
    assert f"cannot listen on 127.0.0.1 port {port}" in busy.stderr
    assert "--port 0 picks a free port" in busy.stderr
