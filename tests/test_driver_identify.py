"""`acquire identify` against the simulated meter: identity, dialect summary, one reading."""

from __future__ import annotations

import pyvisa

from acquire.cli import main
from acquire.units import format_si


def test_identify_prints_identity_dialect_and_a_reading(sim, capsys):
    assert main(["identify", "--resource", sim.resource, "--measure", "1k"]) == 0
    out = capsys.readouterr().out
    rm = pyvisa.ResourceManager("@py")
    raw = rm.open_resource(sim.resource, read_termination="\n", write_termination="\n")
    fields = raw.query("*IDN?").split(",")
    raw.close()
    rm.close()
    first = out.splitlines()[0]
    assert first.startswith("meter") and all(field.strip() in first for field in fields)
    assert "dialect     simulated" in out
    assert "list mode   up to 2000 points per list" in out
    assert "errors      none" in out
    z = complex(sim.seen_impedance(1e3))
    assert f"R = {format_si(z.real, 'Ω')}, X = {format_si(z.imag, 'Ω')}" in out


def test_identify_reports_user_errors_in_one_line(sim, capsys):
    assert main(["identify", "--resource", sim.resource, "--measure", "50MHz"]) == 2
    err = capsys.readouterr().err
    assert "1 frequency lies outside 10 Hz to 3e+07 Hz" in err
    assert main(["identify", "--resource", sim.resource, "--dialect", "nope"]) == 2
    assert "no shipped dialect named 'nope'" in capsys.readouterr().err
