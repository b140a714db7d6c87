"""The generic driver against the simulated meter, through pyvisa-py and a real TCP socket.

The expected impedance is the simulator's own exact value (``sim.seen_impedance``, noise off):
what matters here is that every reply form, transfer format, chunking and fault ends either in
exactly that number or in one of the project's errors; the conversions themselves are checked
against independent circuit formulas in test_driver_readings.py.
"""

from __future__ import annotations

import re
import time
from pathlib import Path

import numpy as np
import pytest
import pyvisa

from drivers.dialect import DIRECTORY
from drivers.errors import (
    DialectError,
    InstrumentError,
    MeterTimeout,
    OutOfRange,
    SettingRefused,
)
from drivers.meter import ImpedanceMeter

# Below and above the coil-on-leads resonance (the top point reads capacitive).
F = np.array([10.0, 1e3, 12345.6789, 1e5, 1e6, 1.368e7, 3e7])


@pytest.fixture(autouse=True)
def clean(sim):
    sim.clear_faults()
    sim.set_measure_time(0)
    yield
    sim.clear_faults()
    sim.set_measure_time(0)


def dialect_variant(tmp_path: Path, edits: dict[str, str], name: str = "variant") -> Path:
    text = (DIRECTORY / "simulated.toml").read_text()
    for pattern, replacement in edits.items():
        text, count = re.subn(pattern, replacement, text, flags=re.MULTILINE)
        assert count, pattern
    path = tmp_path / f"{name}.toml"
    path.write_text(text)
    return path


def meter_for(sim, dialect="simulated", **kw) -> ImpedanceMeter:
    kw.setdefault("retry_wait", 0.01)
    return ImpedanceMeter.open(sim.resource, dialect=dialect, **kw)


def test_closing_the_meter_leaves_other_resources_open(sim):
    rm = pyvisa.ResourceManager("@py")
    other = rm.open_resource(sim.resource, read_termination="\n", write_termination="\n")
    try:
        with meter_for(sim) as meter:
            meter.identify()
        assert other.query("*OPC?") == "1"
    finally:
        other.close()


def test_identity_and_nagle_off(sim):
    with meter_for(sim) as meter:
        ident = meter.identify()
        assert ident.manufacturer and ident.model and ident.serial
        assert meter.session.nodelay is True


#: Every pair the driver reads, the simulator's settings that select it and its FORM:PAIR? reply.
PAIRS = [
    ('["R", "X"]', "CIRC SER;FORM:PAIR REAL,IMAG", "REAL,IMAG"),
    ('["X", "R"]', "FORM:PAIR IMAGINARY,REAL", "IMAG,REAL"),
    ('["Z", "theta_deg"]', "UNIT:ANGL DEG;FORM:PAIR MAGN,PHAS", "MAGN,PHAS"),
    ('["Z", "theta_rad"]', "UNIT:ANGLE RADIAN;FORM:PAIR MAGNITUDE,PHASE", "MAGN,PHAS"),
    ('["G", "B"]', "FORM:PAIR COND,SUSC", "COND,SUSC"),
    ('["Ls", "Rs"]', "CIRC SER;FORM:PAIR IND,RES", "IND,RES"),
    ('["Ls", "Q"]', "CIRC SER;FORM:PAIR IND,QUAL", "IND,QUAL"),
    ('["Ls", "D"]', "CIRC SER;FORM:PAIR IND,DISS", "IND,DISS"),
    ('["Lp", "Rp"]', "CIRCUIT PARALLEL;FORM:PAIR INDUCTANCE,RESISTANCE", "IND,RES"),
    ('["Lp", "Q"]', "CIRC PAR;FORM:PAIR IND,QUAL", "IND,QUAL"),
    ('["Lp", "D"]', "CIRC PAR;FORM:PAIR IND,DISS", "IND,DISS"),
    ('["Rp", "Lp"]', "CIRC PAR;FORM:PAIR RES,IND", "RES,IND"),
    ('["Cs", "Rs"]', "CIRC SER;FORM:PAIR CAP,RES", "CAP,RES"),
    ('["Cs", "D"]', "CIRC SER;FORM:PAIR CAP,DISS", "CAP,DISS"),
    ('["Cs", "Q"]', "CIRC SER;FORM:PAIR CAP,QUAL", "CAP,QUAL"),
    ('["Cp", "Rp"]', "CIRC PAR;FORM:PAIR CAP,RES", "CAP,RES"),
    ('["Cp", "D"]', "CIRC PAR;FORM:PAIR CAPACITANCE,DISSIPATION", "CAP,DISS"),
    ('["Cp", "Q"]', "CIRC PAR;FORM:PAIR CAP,QUAL", "CAP,QUAL"),
]


@pytest.mark.parametrize(("pair", "select", "reply"), PAIRS, ids=[p[1] for p in PAIRS])
def test_every_reply_form_through_the_socket(sim, tmp_path, pair, select, reply):
    setup = f'setup = {{ command = "{select};FORM:BORD NORM" }}'
    path = dialect_variant(tmp_path, {r"^pair = .*$": f"pair = {pair}", r"^setup = .*$": setup})
    with meter_for(sim, path) as meter:
        assert meter.session.query("FORM:PAIR?") == reply
        z = meter.sweep(F)
        assert meter.measure(F[2]) == pytest.approx(complex(sim.seen_impedance(F[2])), rel=1e-12)
    np.testing.assert_allclose(z, sim.seen_impedance(F), rtol=1e-11)


def test_list_and_point_by_point_agree_and_are_exact(sim):
    f = np.geomspace(10, 30e6, 301)
    with meter_for(sim) as meter:
        by_list = meter.sweep(f, mode="list")
        by_point = meter.sweep(f, mode="points")
        assert meter.session.query("FREQ:MODE?") == "FIX"
        by_list_again = meter.sweep(f[:5], mode="list")
        assert meter.measure(f[7]) == by_list[7]
        assert meter.session.reconnects == 0
    np.testing.assert_array_equal(by_list_again, by_list[:5])
    np.testing.assert_array_equal(by_list, by_point)
    np.testing.assert_allclose(by_list, sim.seen_impedance(f), rtol=1e-15)


def test_long_lists_are_chunked_and_streamed_in_order(sim, tmp_path):
    path = dialect_variant(tmp_path, {r"^max_points = 2000$": "max_points = 100"})
    f = np.geomspace(100, 1e6, 250)
    chunks: list[tuple[np.ndarray, np.ndarray]] = []
    with meter_for(sim, path) as meter:
        z = meter.sweep(f, on_points=lambda fc, zc: chunks.append((fc, zc)))
    assert [c[0].size for c in chunks] == [83, 84, 83]
    np.testing.assert_array_equal(np.concatenate([c[0] for c in chunks]), f)
    np.testing.assert_array_equal(np.concatenate([c[1] for c in chunks]), z)
    np.testing.assert_allclose(z, sim.seen_impedance(f), rtol=1e-15)


def test_points_are_streamed_one_by_one(sim):
    seen = []
    with meter_for(sim) as meter:
        z = meter.sweep(
            F[:3], on_points=lambda fc, zc: seen.append((fc.tolist(), zc.tolist())), mode="points"
        )
    assert [s[0] for s in seen] == [[F[0]], [F[1]], [F[2]]]
    assert [s[1][0] for s in seen] == z.tolist()


@pytest.mark.parametrize("order", ["big", "little"])
def test_binary_transfer_equals_ascii(sim, tmp_path, order):
    edits = {}
    if order == "little":
        edits = {
            r'^byte_order = "big"$': 'byte_order = "little"',
            "FORM:BORD NORM": "FORM:BORD SWAP",
        }
    path = dialect_variant(tmp_path, edits or {r"^name = .*$": 'name = "binary"'})
    f = np.geomspace(10, 30e6, 400)
    with meter_for(sim, path) as meter:
        ascii_z = meter.sweep(f)
        meter.configure(transfer="binary")
        assert meter.transfer == "binary"
        assert meter.session.query("FORM?").startswith("REAL")
        binary_z = meter.sweep(f)
        single = meter.measure(1e3)
        meter.configure(transfer="ascii")
    np.testing.assert_array_equal(binary_z, ascii_z)
    assert single == complex(sim.seen_impedance(1e3))


def test_frequencies_outside_the_dialect_are_refused_before_sending(sim):
    with meter_for(sim) as meter:
        meter.measure(1234.0)
        with pytest.raises(OutOfRange, match="nothing was sent"):
            meter.sweep([1e3, 5e7, 2e3])
        with pytest.raises(OutOfRange):
            meter.measure(1.0)
        # The meter still holds the last frequency actually sent.
        assert float(meter.session.query("FREQ?")) == 1234.0


def test_refused_settings_are_reported(sim, tmp_path):
    # A dialect without limits lets the values through to the meter, which refuses them
    # (-222, data out of range).
    path = dialect_variant(
        tmp_path,
        {
            r"^set_level = .*$": 'set_level = { command = "VOLT {level}" }',
            r"^set_averaging = .*$": 'set_averaging = { command = "AVER:COUN {averaging}" }',
        },
    )
    with meter_for(sim, path) as meter:
        meter.configure(level=0.25)
        with pytest.raises(SettingRefused, match=r"level=5.0.*-222"):
            meter.configure(level=5.0)
        with pytest.raises(SettingRefused, match="-222"):
            meter.configure(averaging=1000)
        assert float(meter.session.query("VOLT?")) == 0.25
        assert meter.settings == {"level": 0.25}
        assert meter.errors() == []
    only_max = dialect_variant(
        tmp_path,
        {r"^set_averaging = .*$": 'set_averaging = { command = "AVER:COUN {averaging}", max = 8 }'},
        name="only_max",
    )
    with (
        meter_for(sim, only_max) as meter,
        pytest.raises(OutOfRange, match="averaging 9 is outside - to 8"),
    ):
        meter.configure(averaging=9)


def test_missing_optional_operation_is_a_dialect_error(sim, tmp_path):
    path = dialect_variant(tmp_path, {r"^(dc_resistance|set_speed) = .*$": ""})
    with meter_for(sim, path) as meter:
        with pytest.raises(DialectError, match="no operation 'dc_resistance'"):
            meter.dc_resistance()
        with pytest.raises(DialectError, match="no operation 'set_speed'"):
            meter.configure(speed="fast")


def test_dc_resistance(sim):
    with meter_for(sim) as meter:
        rdc = meter.dc_resistance()
    # The seen impedance's real part at a very low frequency tends to the DC resistance.
    assert rdc == pytest.approx(sim.seen_impedance(1e-3).real, rel=1e-6)


@pytest.mark.parametrize("kind", ["truncate", "garble"])
def test_dc_resistance_cut_short_or_garbled_is_measured_again(sim, kind):
    # A reply cut short must not become a shorter number (0.07 ohm read as 6.99 ohm).
    with meter_for(sim, timeout=0.3) as meter:
        exact = meter.dc_resistance()
        for seed in range(5):  # the seed moves the place where the reply is cut
            sim.reseed(seed)
            sim.inject(kind, 1)
            assert meter.dc_resistance() == exact
        assert meter.session.reconnects == 5


def test_reset_returns_to_defaults_and_keeps_the_reading_pair(sim):
    with meter_for(sim) as meter:
        meter.configure(level=1.5, speed="slow")
        meter.session.write("CIRC PAR;FORM:PAIR CAP,DISS")
        meter.reset()
        assert meter.settings == {}
        assert float(meter.session.query("VOLT?")) == 0.5
        assert meter.session.query("FORM:PAIR?;CIRC?") == "REAL,IMAG;SER"
        assert meter.measure(1e3) == complex(sim.seen_impedance(1e3))


def test_reconnect_restores_the_last_configuration(sim):
    with meter_for(sim) as meter:
        meter.configure(level=0.25, averaging=2)
        other = pyvisa.ResourceManager("@py").open_resource(
            sim.resource, read_termination="\n", write_termination="\n"
        )
        assert other.query("*RST;*OPC?") == "1"  # settings are instrument-wide, as on one meter
        other.close()
        sim.inject("drop", 1)
        z = meter.measure(2e3)
        assert meter.session.reconnects == 1
        assert float(meter.session.query("VOLT?")) == 0.25
        assert int(meter.session.query("AVER:COUN?")) == 2
    assert z == complex(sim.seen_impedance(2e3))


FAULTS = [("drop", 1), ("drop", 2), ("stall", 1), ("garble", 1), ("truncate", 1), ("count", 1)]


@pytest.mark.parametrize(("kind", "n"), FAULTS)
@pytest.mark.parametrize(
    ("mode", "transfer"), [("points", "ascii"), ("list", "ascii"), ("list", "binary")]
)
def test_each_fault_ends_in_the_right_number_after_a_reconnect(
    sim, tmp_path, kind, n, mode, transfer
):
    path = dialect_variant(tmp_path, {r"^max_points = 2000$": "max_points = 3"})
    timeout, retries = 0.3, 2
    with meter_for(sim, path, timeout=timeout, retries=retries) as meter:
        meter.configure(transfer=transfer)
        sim.inject(kind, n)
        start = time.monotonic()
        z = meter.sweep(F, mode=mode)
        elapsed = time.monotonic() - start
        assert meter.session.reconnects >= 1
    np.testing.assert_array_equal(z, sim.seen_impedance(F))
    per_try = timeout + 3 * 0.5  # the base timeout plus the dialect's allowance per point
    assert elapsed < (retries + 1) * per_try + 2.0  # bounded: no hang


def test_an_operation_the_dialect_marks_not_idempotent_is_not_repeated(sim, tmp_path):
    path = dialect_variant(
        tmp_path, {r"^(read = \{.*)( \})$": r"\1, idempotent = false\2"}, name="once"
    )
    with meter_for(sim, path, timeout=0.3) as meter:
        sim.inject("stall", 1)
        with pytest.raises(MeterTimeout, match="not repeated"):
            meter.measure(1e3)
        assert meter.session.reconnects == 1
        assert meter.measure(2e3) == complex(sim.seen_impedance(2e3))


def test_repeated_random_faults_never_give_a_wrong_number(sim):
    f = np.geomspace(100, 1e6, 120)
    completed = 0
    for seed in (7, 8, 9):
        sim.clear_faults()
        sim.reseed(seed)
        sim.inject("garble", rate=0.05)
        sim.inject("truncate", rate=0.03)
        sim.inject("count", rate=0.03)
        with meter_for(sim, timeout=0.3, retries=3) as meter:
            try:
                z = meter.sweep(f, mode="points")
            except InstrumentError:
                continue  # the project's error is an acceptable end, a wrong number is not
            assert meter.session.reconnects > 3  # the faults did fire
        np.testing.assert_array_equal(z, sim.seen_impedance(f))
        completed += 1
    sim.clear_faults()
    assert completed >= 1  # at least one seed gets through, so the comparison above ran


def test_error_pushed_on_the_queue_during_a_sweep_is_reported(sim):
    with meter_for(sim) as meter:
        sim.inject("error", -350)
        with pytest.raises(SettingRefused, match="the sweep.*-350"):
            meter.sweep(F)
        assert meter.errors() == []
        np.testing.assert_array_equal(meter.sweep(F), sim.seen_impedance(F))


def test_overrange_at_one_frequency(sim):
    with meter_for(sim) as meter:
        sim.inject("overrange", 1e5)
        z = meter.sweep(F)
    hit = F == 1e5
    assert np.all(np.isinf(z[hit].real) & np.isinf(z[hit].imag))
    np.testing.assert_array_equal(z[~hit], sim.seen_impedance(F[~hit]))


def test_a_stale_reply_after_a_timeout_is_never_a_later_answer(sim, tmp_path):
    path = dialect_variant(tmp_path, {r"^per_point_timeout = .*$": "per_point_timeout = 0.0"})
    with meter_for(sim, path, timeout=0.2, retries=0) as meter:
        sim.set_measure_time(0.5)
        with pytest.raises(InstrumentError) as info:
            meter.measure(1e3)
        assert isinstance(info.value.__cause__, MeterTimeout)
        sim.set_measure_time(0)
        time.sleep(0.5)  # the first measurement has finished by now
        z = meter.measure(2e5)
        assert z == complex(sim.seen_impedance(2e5))
        assert meter.measure(1e3) == complex(sim.seen_impedance(1e3))


def test_list_timeout_grows_with_the_number_of_points(sim, tmp_path):
    path = dialect_variant(tmp_path, {r"^per_point_timeout = .*$": "per_point_timeout = 0.01"})
    f = np.geomspace(100, 1e6, 200)
    with meter_for(sim, path, timeout=0.2, retries=0) as meter:
        sim.set_measure_time(0.003)  # 0.6 s in all: beyond the base timeout, inside the allowance
        z = meter.sweep(f, mode="list")
    np.testing.assert_array_equal(z, sim.seen_impedance(f))


SHAPES = {
    "settle": {r"^settle = 0.0$": "settle = 0.01"},
    "separate messages": {r"^compound = true": "compound = false"},
    "trigger-wait-fetch": {
        r"^point = .*$": (
            'point = ["point_mode", "set_frequency", "trigger", "wait", "fetch", "wait"]'
        ),
        r"^list = .*$": 'list = ["list_mode", "set_list", "trigger", "wait", "fetch", "wait"]',
    },
}


@pytest.mark.parametrize("shape", SHAPES)
def test_other_dialect_shapes_measure_the_same(sim, tmp_path, shape):
    path = dialect_variant(tmp_path, SHAPES[shape])
    f = F[:4]
    with meter_for(sim, path) as meter:
        by_point = meter.sweep(f, mode="points")
        by_list = meter.sweep(f, mode="list")
        assert meter.session.reconnects == 0
    np.testing.assert_array_equal(by_point, sim.seen_impedance(f))
    np.testing.assert_array_equal(by_list, by_point)
