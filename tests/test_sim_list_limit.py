"""The simulated meter's longest frequency list, and what follows it.

The limit's source is the simulator's documentation (drivers/simulator/COMMANDS.md, the
``LIST:FREQuency`` row: "1 to N points"), read here from the text; the meter, the shipped
dialects and ``acquire demo --points`` must all agree with it.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest
import pyvisa

from acquire.cli import main
from drivers.dialect_file import load_dialect

ROOT = Path(__file__).resolve().parent.parent


def documented_limit() -> int:
    text = (ROOT / "drivers" / "simulator" / "COMMANDS.md").read_text(encoding="utf-8")
    row = next(line for line in text.splitlines() if "LIST:FREQuency <f1>" in line)
    return int(re.search(r"1 to (\d+) points", row).group(1))


@pytest.fixture
def meter(sim):
    rm = pyvisa.ResourceManager("@py")
    inst = rm.open_resource(sim.resource, read_termination="\n", write_termination="\n")
    inst.timeout = 5000
    inst.query("*RST;*CLS;*OPC?")
    yield inst
    inst.close()
    rm.close()


def test_the_meter_takes_the_documented_list_and_no_more(meter):
    n = documented_limit()
    f = ",".join(f"{v:.6g}" for v in np.geomspace(100, 1e6, n))
    assert meter.query(f"LIST:FREQ {f};LIST:FREQ:POIN?") == str(n)
    assert meter.query("SYST:ERR?").startswith("0,")
    # One more is refused and the list stays as it was.
    meter.query(f"LIST:FREQ {f},2e6;*OPC?")
    assert meter.query("SYST:ERR?").startswith("-")
    assert meter.query("LIST:FREQ:POIN?") == str(n)
    assert meter.query(f"LIST:FREQ:LOG 100,1e6,{n};LIST:FREQ:POIN?") == str(n)
    meter.query(f"LIST:FREQ:LOG 100,1e6,{n + 1};*OPC?")
    assert meter.query("SYST:ERR?").startswith("-")


def test_the_shipped_dialects_fit_the_list():
    for name in ("simulated", "template"):
        dialect = load_dialect(ROOT / "drivers" / "dialects" / f"{name}.toml")
        assert dialect.list_max_points == documented_limit(), name


def test_demo_refuses_more_points_than_one_list_naming_the_limit(tmp_path, capsys):
    n = documented_limit()
    code = main(
        ["demo", "--no-live", "--store", f"sqlite:///{tmp_path / 'd.db'}"]
        + [
            "--points",
            str(n + 1),
        ]
    )
    assert code == 2
    assert f"between 2 and {n}" in capsys.readouterr().err
    assert not (tmp_path / "d.db").exists()
