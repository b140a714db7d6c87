"""The generic driver at the protocol level, against pyvisa-sim profiles (``@sim`` backend).

sim_profiles/protocol-meters.yaml holds fixed readings of two invented parts in several reading
forms; the expected impedances are recomputed here from the circuits with standard circuit
theory (Z of a series R-L, Y of a parallel R-C; from memory).
"""

from __future__ import annotations

import math
import re
import time
from pathlib import Path

import numpy as np
import pytest

import sim_profiles
from drivers.dialect import DIRECTORY
from drivers.errors import ConnectionLost, DialectError, OutOfRange, ReplyError, SettingRefused
from drivers.meter import ImpedanceMeter

BACKEND = f"{sim_profiles.path('protocol-meters.yaml')}@sim"
PORTS = {
    "coil-real-imag": 5025,
    "coil-magnitude-degrees": 5026,
    "coil-magnitude-radians": 5027,
    "coil-admittance": 5028,
    "coil-series-inductance-quality": 5029,
    "coil-parallel-inductance-resistance": 5030,
    "capacitor-parallel-dissipation": 5031,
    "overrange": 5032,
    "invalid": 5033,
    "wrong-count": 5034,
    "mute": 5035,
}
W = 2 * math.pi * 1e3
COIL = 2.0 + 1j * W * 1e-3  # 1 mH in series with 2 ohm, at 1 kHz
CAPACITOR = 1 / (1e-6 + 1j * W * 100e-9)  # 100 nF across 1 Mohm, at 1 kHz


def resource(device: str) -> str:
    return f"TCPIP0::127.0.0.1::{PORTS[device]}::SOCKET"


#: pyvisa-sim answers each query of a compound message on its own line, where IEEE 488.2 joins
#: them with ";" into one; so the profiles are driven with one query per message.
ONE_QUERY = {
    r"^point = .*$": 'point = ["point_mode", "set_frequency", "read"]',
    r"^list = .*$": 'list = ["list_mode", "set_list", "read"]',
}


def dialect_variant(tmp_path: Path, edits: dict[str, str]) -> Path:
    text = (DIRECTORY / "simulated.toml").read_text()
    for pattern, replacement in (ONE_QUERY | edits).items():
        text, count = re.subn(pattern, replacement, text, flags=re.MULTILINE)
        assert count, pattern
    path = tmp_path / "variant.toml"
    path.write_text(text)
    return path


def pair_dialect(tmp_path: Path, pair: str, select: str, qd_sign: str = "signed") -> Path:
    return dialect_variant(
        tmp_path,
        {
            r"^pair = .*$": f"pair = {pair}",
            r"^qd_sign = .*$": f'qd_sign = "{qd_sign}"',
            r"^setup = .*$": f'setup = {{ command = "{select};FORM:BORD NORM" }}',
        },
    )


def open_meter(device: str, dialect: Path, **kw) -> ImpedanceMeter:
    return ImpedanceMeter.open(resource(device), dialect=dialect, backend=BACKEND, **kw)


@pytest.fixture
def base(tmp_path) -> Path:
    """The simulated dialect, one query per message."""
    return dialect_variant(tmp_path, {})


def test_identity(base):
    with open_meter("coil-real-imag", base) as meter:
        ident = meter.identify()
    assert (ident.manufacturer, ident.model, ident.serial) == (
        "Bench Example",
        "Protocol Meter",
        "EXAMPLE-01",
    )
    assert ident.firmware == "1.0"


@pytest.mark.parametrize(
    ("device", "pair", "select", "qd_sign", "expected"),
    [
        ("coil-real-imag", '["R", "X"]', "FORM:PAIR REAL,IMAG", "signed", COIL),
        ("coil-magnitude-degrees", '["Z", "theta_deg"]', "UNIT:ANGL DEG;FORM:PAIR MAGN,PHAS",
         "signed", COIL),
        ("coil-magnitude-radians", '["Z", "theta_rad"]', "UNIT:ANGL RAD;FORM:PAIR MAGN,PHAS",
         "signed", COIL),
        ("coil-admittance", '["G", "B"]', "FORM:PAIR COND,SUSC", "signed", COIL),
        ("coil-series-inductance-quality", '["Ls", "Q"]', "CIRC SER;FORM:PAIR IND,QUAL",
         "signed", COIL),
        ("coil-parallel-inductance-resistance", '["Lp", "Rp"]', "CIRC PAR;FORM:PAIR IND,RES",
         "signed", COIL),
        # The profile's capacitor reports D = G/(w Cp) > 0: the by_mode convention.
        ("capacitor-parallel-dissipation", '["Cp", "D"]', "CIRC PAR;FORM:PAIR CAP,DISS",
         "by_mode", CAPACITOR),
    ],
)  # fmt: skip
def test_each_reading_form_gives_the_circuit_impedance(
    tmp_path, device, pair, select, qd_sign, expected
):
    with open_meter(device, pair_dialect(tmp_path, pair, select, qd_sign)) as meter:
        z = meter.measure(1e3)
    assert z == pytest.approx(expected, rel=1e-12)


def test_overrange_and_invalid_readings(base):
    with open_meter("overrange", base) as meter:
        z = meter.measure(1e3)
        assert z.real == math.inf and z.imag == math.inf
    with open_meter("invalid", base) as meter:
        z = meter.measure(1e3)
        assert math.isnan(z.real) and math.isnan(z.imag)
        assert math.isnan(meter.dc_resistance())


def test_dc_resistance_and_settings(base):
    with open_meter("coil-real-imag", base) as meter:
        assert meter.dc_resistance() == 1.25
        meter.configure(level=0.5, speed="slow", averaging=4)
        assert meter.session.query("VOLT?") == "0.5"
        assert meter.session.query("PER?") == "16"
        assert meter.session.query("AVER:COUN?") == "4"
        assert meter.settings == {"level": 0.5, "speed": "slow", "averaging": 4}
        assert meter.errors() == []


def test_setting_refused_by_the_meter_is_reported(base):
    # The profile's meter takes averaging 1..50; the dialect allows up to 500.
    with open_meter("coil-real-imag", base) as meter:
        before = meter.session.query("AVER:COUN?")
        with pytest.raises(SettingRefused, match=r"averaging=100.*-100"):
            meter.configure(averaging=100)
        assert meter.session.query("AVER:COUN?") == before
        assert "averaging" not in meter.settings
        assert meter.errors() == []


def test_settings_outside_the_dialect_are_refused_before_sending(base, monkeypatch):
    with open_meter("coil-real-imag", base) as meter:
        sent: list[str] = []
        monkeypatch.setattr(meter.session, "write", sent.append)
        monkeypatch.setattr(meter.session, "query", lambda m, t=None: sent.append(m))
        with pytest.raises(OutOfRange, match="level 5 V is outside 0.002 V to 3 V"):
            meter.configure(level=5.0)
        with pytest.raises(OutOfRange, match="speed 'warp' is not one of fast, medium, slow"):
            meter.configure(speed="warp")
        with pytest.raises(OutOfRange, match="whole number"):
            meter.configure(averaging=2.5)
        with pytest.raises(OutOfRange, match=r"2 frequencies lie outside 10 Hz to 3e\+07 Hz"):
            meter.sweep([5.0, 1e3, 5e7])
        with pytest.raises(OutOfRange, match="outside"):
            meter.measure(float("nan"))
        assert sent == []


def test_missing_optional_operation_is_a_dialect_error(tmp_path):
    path = dialect_variant(tmp_path, {r"^(dc_resistance|set_level) = .*$": ""})
    with open_meter("coil-real-imag", path) as meter:
        assert not meter.has("dc_resistance")
        with pytest.raises(DialectError, match="no operation 'dc_resistance'"):
            meter.dc_resistance()
        with pytest.raises(DialectError, match="no operation 'set_level' needed to set the level"):
            meter.configure(level=1.0)
        meter.configure(averaging=2)


def test_list_mode_requested_without_one_is_a_dialect_error(tmp_path):
    path = dialect_variant(
        tmp_path, {r"^\[list\]\nmax_points = 2000\nmin_points = 1\n": "", r"^list = \[.*\]$": ""}
    )
    with open_meter("coil-real-imag", path) as meter:
        with pytest.raises(DialectError, match="no list mode"):
            meter.sweep([1e3, 2e3], mode="list")
        # auto falls back to point by point
        np.testing.assert_allclose(meter.sweep([1e3, 1e3]), [COIL, COIL], rtol=1e-12)


def test_trigger_wait_fetch_sequence_and_separate_messages(tmp_path):
    path = dialect_variant(
        tmp_path,
        {
            r"^point = .*$": (
                'point = ["point_mode", "set_frequency", "trigger", "wait", "fetch", "wait"]'
            ),
            r"^compound = true": "compound = false",
            r"^setup = .*$": 'setup = { command = "FORM:PAIR REAL,IMAG" }',
        },
    )
    with open_meter("coil-real-imag", path) as meter:
        assert meter.measure(1e3) == pytest.approx(COIL, rel=1e-12)


def test_wrong_number_of_values_is_never_taken_as_a_reading(base):
    with (
        open_meter("wrong-count", base, retries=1, retry_wait=0.0) as meter,
        pytest.raises(ReplyError, match="every reply was malformed.*expected 2 numbers"),
    ):
        meter.measure(1e3)


def test_a_meter_that_never_answers_ends_in_connection_lost_within_the_bound(tmp_path):
    path = dialect_variant(tmp_path, {r"^per_point_timeout = .*$": "per_point_timeout = 0.0"})
    start = time.monotonic()
    with (
        open_meter("mute", path, timeout=0.2, retries=2, retry_wait=0.01) as meter,
        pytest.raises(ConnectionLost) as info,
    ):
        meter.measure(1e3)
    elapsed = time.monotonic() - start
    message = str(info.value)
    assert resource("mute") in message and "tried 3 times" in message and "MeterTimeout" in message
    # three attempts of 0.2 s plus short waits: well inside a generous bound (no hang)
    assert elapsed < 5.0
