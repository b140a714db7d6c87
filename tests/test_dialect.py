"""Dialect files: the shipped ones load; every kind of mistake is refused with file, key, reason."""

from __future__ import annotations

import dataclasses
import re
import tomllib
from pathlib import Path

import pytest

import sim_profiles
from drivers.dialect import DIRECTORY, OPERATIONS
from drivers.dialect_file import list_dialects, load_dialect
from drivers.errors import DialectError
from drivers.meter import ImpedanceMeter

SIMULATED = DIRECTORY / "simulated.toml"


def variant(tmp_path: Path, edits: dict[str, str] | None = None, append: str = "") -> Path:
    """A copy of the simulated dialect with lines replaced (regex -> text) and text appended."""
    text = SIMULATED.read_text()
    for pattern, replacement in (edits or {}).items():
        text, count = re.subn(pattern, replacement, text, flags=re.MULTILINE)
        assert count, f"pattern {pattern!r} not found in the simulated dialect"
    path = tmp_path / "variant.toml"
    path.write_text(text + append)
    return path


def test_shipped_dialects():
    assert "simulated" in list_dialects()
    assert "template" not in list_dialects()
    d = load_dialect("simulated")
    assert d.name == "simulated"
    assert d.pair == ("R", "X") and d.qd_sign == "signed"
    assert (d.frequency_min, d.frequency_max) == (10.0, 30e6)
    assert d.list_max_points == 2000 and d.has_list
    assert d.point_sequence == ("point_mode", "set_frequency", "read", "wait")
    assert d.has("dc_resistance") and not d.has("nonsense")
    assert d.operations["next_error"].idempotent is False
    assert d.operations["set_speed"].choices["medium"] == "4"
    assert d.operations["set_list"].placeholders == {"frequencies"}


def test_template_is_valid_and_documents_every_operation():
    d = load_dialect("template")
    assert set(d.operations) == set(OPERATIONS)
    text = (DIRECTORY / "template.toml").read_text()
    for key in ("write_termination", "per_point_timeout", "max_points", "qd_sign", "settle"):
        assert key in text


def test_the_template_as_shipped_states_the_simulated_meter(tmp_path):
    # The template says it drives the simulated meter as shipped; its accuracy table must then
    # be the meter's own, read here from the meter's profile (sim_profiles/simulated-meter.toml),
    # and every other setting the simulated dialect's.
    template, simulated = load_dialect("template"), load_dialect("simulated")
    profile = tomllib.loads(
        (Path(sim_profiles.__file__).parent / "simulated-meter.toml").read_text()
    )
    assert template.accuracy.reference_level == profile["reference_level"]
    assert template.accuracy.relative == profile["systematic_accuracy"]
    assert template.accuracy.repeatability == profile["accuracy_class"]
    for field in dataclasses.fields(simulated):
        if field.name not in ("name", "path", "description"):
            assert getattr(template, field.name) == getattr(simulated, field.name), field.name


def test_load_by_path_and_unknown_names(tmp_path):
    assert load_dialect(SIMULATED).path == SIMULATED
    with pytest.raises(DialectError, match="no shipped dialect named 'nope'.*simulated"):
        load_dialect("nope")
    with pytest.raises(DialectError, match="no such dialect file"):
        load_dialect(tmp_path / "missing.toml")


def test_missing_operation_is_named_with_what_it_was_for():
    d = load_dialect("simulated")
    with pytest.raises(
        DialectError, match=r"simulated\.toml\) has no operation .bogus. needed to test"
    ):
        d.operation("bogus", "test")


def test_optional_operations_may_be_left_out(tmp_path):
    path = variant(tmp_path, {r"^(dc_resistance|set_level|set_speed|reset) = .*$": ""})
    d = load_dialect(path)
    assert not d.has("dc_resistance") and not d.has("set_level") and d.has("set_averaging")


def test_list_mode_may_be_left_out(tmp_path):
    path = variant(
        tmp_path,
        {r"^\[list\]\nmax_points = 2000\nmin_points = 1\n": "", r"^list = \[.*\]$": ""},
    )
    d = load_dialect(path)
    assert not d.has_list and d.list_sequence == ()


def test_trigger_wait_fetch_sequence(tmp_path):
    path = variant(
        tmp_path, {r"^point = .*$": 'point = ["set_frequency", "trigger", "wait", "fetch", "wait"]'}
    )
    assert load_dialect(path).point_sequence[-3:] == ("wait", "fetch", "wait")


MALFORMED = [
    # (edits, appended text, key named in the message, reason pattern)
    ({r"^schema = 1$": "schema = 2"}, "", "schema", "reads schema 1"),
    ({r'^name = "simulated"$': 'name = ""'}, "", "name", "must not be empty"),
    ({r"^\[frequency\]\nmin = 10.0\nmax = 30.0e6\n": ""}, "", "frequency", "missing table"),
    ({r"^max = 30.0e6$": "max = 5.0"}, "", "frequency.max", "above frequency.min"),
    ({r"^min = 10.0$": "min = -1.0"}, "", "frequency.min", "must be > 0"),
    ({r"^min = 10.0$": 'min = "ten"'}, "", "frequency.min", "must be a number"),
    ({r"^pair = .*$": 'pair = ["R", "Q"]'}, "", "reading.pair", "cannot be turned into impedance"),
    ({r"^pair = .*$": 'pair = ["R", "Y"]'}, "", "reading.pair", "unknown quantity 'Y'"),
    ({r"^pair = .*$": 'pair = ["R"]'}, "", "reading.pair", "two quantity names"),
    ({r"^qd_sign = .*$": 'qd_sign = "positive"'}, "", "reading.qd_sign", "signed, by_mode"),
    ({r"^timeout = 5.0 .*$": "timeout = 0"}, "", "connection.timeout", "must be > 0"),
    ({r"^retries = 2$": "retries = 50"}, "", "connection.retries", "between 0 and 10"),
    ({r"^compound = true .*$": 'compound = "yes"'}, "", "connection.compound", "true or false"),
    ({r"^encoding = .*$": 'encoding = "klingon"'}, "", "connection.encoding", "unknown encoding"),
    ({r"^\[connection\]$": "[connection]\nbaud = 9600"}, "", "connection.baud", "unknown key"),
    ({}, "\n[extras]\nx = 1\n", "extras", "unknown key"),
    ({r"^max_points = 2000$": "max_points = 0"}, "", "list.max_points", "at least 1"),
    ({r"^min_points = 1$": "min_points = 5000"}, "", "list.min_points", "between 1 and max"),
    ({r"^default = .*$": 'default = "hex"'}, "", "transfer.default", "'ascii' or 'binary'"),
    ({r"^datatype = .*$": 'datatype = "int16"'}, "", "transfer.datatype", "float64"),
    ({r"^byte_order = .*$": 'byte_order = "middle"'}, "", "transfer.byte_order", "big"),
    (
        {r'^default = "ascii"$': 'default = "binary"', r"^binary = .*$": ""},
        "",
        "operations.binary",
        "needs 'binary' to switch back",
    ),
    ({r"^identify = .*$": ""}, "", "operations.identify", "missing; the driver needs it"),
    (
        {r"^reset = .*$": 'reboot = { command = "*RST" }'},
        "",
        "operations.reboot",
        "unknown operation",
    ),
    ({r"^reset = .*$": 'reset = "*RST"'}, "", "operations.reset", "must be a table"),
    ({r"^reset = .*$": 'reset = { command = "" }'}, "", "operations.reset.command", "empty"),
    ({r"^reset = .*$": 'reset = { cmd = "*RST" }'}, "", "operations.reset.cmd", "unknown key"),
    (
        {r"^read = .*$": 'read = { command = "READ?", query = true }'},
        "",
        "operations.read.reply",
        "missing; say what the reply is",
    ),
    (
        {r"^read = .*$": 'read = { command = "READ?", reply = "readings" }'},
        "",
        "operations.read.reply",
        "not a query",
    ),
    (
        {r"^read = .*$": 'read = { command = "READ?", query = true, reply = "number" }'},
        "",
        "operations.read.reply",
        "must be 'readings'",
    ),
    (
        {r"^read = .*$": 'read = { command = "READ?", query = true, reply = "poem" }'},
        "",
        "operations.read.reply",
        "must be one of",
    ),
    (
        {r"^set_frequency = .*$": 'set_frequency = { command = "FREQ {freq}" }'},
        "",
        "operations.set_frequency.command",
        "unknown placeholder {freq}",
    ),
    (
        {r"^set_frequency = .*$": 'set_frequency = { command = "FREQ {frequency:.3f}" }'},
        "",
        "operations.set_frequency.command",
        "plain {name}",
    ),
    (
        {r"^set_frequency = .*$": 'set_frequency = { command = "FREQ {frequency" }'},
        "",
        "operations.set_frequency.command",
        "bad template",
    ),
    (
        {r"^reset = .*$": 'reset = { command = "*RST;VOLT {level}" }'},
        "",
        "operations.reset.command",
        "not available to this operation",
    ),
    (
        {r"^list_mode = .*$": 'list_mode = { command = "FREQ:MODE LIST;FREQ {frequency}" }'},
        "",
        "operations.list_mode.command",
        "not available in sequence.list",
    ),
    (
        {r"^point = .*$": 'point = ["point_mode", "set_frequency", "measure"]'},
        "",
        "sequence.point",
        "no \\[operations.measure\\]",
    ),
    (
        {r"^point = .*$": 'point = ["point_mode", "set_frequency"]'},
        "",
        "sequence.point",
        "returning readings",
    ),
    ({r"^point = .*$": 'point = ["point_mode", "read"]'}, "", "sequence.point", "never be told"),
    ({r"^point = .*$": "point = []"}, "", "sequence.point", "non-empty list"),
    (
        {r"^point = .*$": 'point = ["set_frequency", "read", "identify"]'},
        "",
        "sequence.point",
        "only be acknowledgements",
    ),
    (
        {r"^point = .*$": 'point = ["set_frequency", "read", "fetch"]'},
        "",
        "sequence.point",
        "exactly one query returning readings",
    ),
    ({r"^settle = 0.0$": "settle = -1"}, "", "sequence.settle", ">= 0"),
    (
        {r"^\[list\]\nmax_points = 2000\nmin_points = 1\n": ""},
        "",
        "sequence.list",
        "without a \\[list\\] table",
    ),
    (
        {r"^set_speed = .*$": 'set_speed = { command = "PER {speed}" }'},
        "",
        "operations.set_speed.choices",
        "map speed words",
    ),
    (
        {r"^set_level = .*$": 'set_level = { command = "VOLT {level}", min = 2.0, max = 0.1 }'},
        "",
        "operations.set_level.max",
        "not be below min",
    ),
    ({r"^warning_codes = .*$": 'warning_codes = ["a"]'}, "", "errors.warning_codes", "integer"),
]


@pytest.mark.parametrize(("edits", "append", "key", "reason"), MALFORMED, ids=lambda v: None)
def test_malformed_dialect_is_refused_with_file_key_and_reason(
    tmp_path, edits, append, key, reason
):
    path = variant(tmp_path, edits, append)
    with pytest.raises(DialectError) as info:
        load_dialect(path)
    message = str(info.value)
    assert message.startswith(str(path))
    assert f"key {key!r}" in message
    assert re.search(reason, message), message


def test_toml_syntax_error_names_the_file_and_line(tmp_path):
    path = variant(tmp_path, {r"^name = .*$": "name = = 3"})
    with pytest.raises(DialectError, match=r"variant\.toml: not valid TOML: .*line \d+"):
        load_dialect(path)


# The simulated meter's retired words (the dialect of the previous release used them) and what
# each must be told to say now: the table of drivers/simulator/COMMANDS.md, checked here by hand.
RETIRED_PAIRS = [
    ("RX", "FORM:PAIR REAL,IMAG"),
    ("ZDEG", "UNIT:ANGL DEG;FORM:PAIR MAGN,PHAS"),
    ("ZRAD", "UNIT:ANGL RAD;FORM:PAIR MAGN,PHAS"),
    ("GB", "FORM:PAIR COND,SUSC"),
    ("LSRS", "CIRC SER;FORM:PAIR IND,RES"),
    ("LPRP", "CIRC PAR;FORM:PAIR IND,RES"),
    ("CSRS", "CIRC SER;FORM:PAIR CAP,RES"),
    ("CPD", "CIRC PAR;FORM:PAIR CAP,DISS"),
    ("LSQ", "CIRC SER;FORM:PAIR IND,QUAL"),
]


@pytest.mark.parametrize(("old", "new"), RETIRED_PAIRS)
def test_a_dialect_with_a_retired_pair_name_fails_naming_the_new_one(tmp_path, old, new):
    setup = f'setup = {{ command = "FORM:PAIR {old};FORM:BORD NORM" }}'
    path = variant(tmp_path, {r"^setup = .*$": setup})
    with pytest.raises(DialectError) as info:
        load_dialect(path)
    message = str(info.value)
    assert message.startswith(f"{path}: key 'operations.setup.command': ")
    assert f"'FORM:PAIR {old};FORM:BORD NORM' uses a reading-pair name" in message
    assert f"the simulator now says {new} " in message


def test_the_previous_simulated_dialect_fails_on_its_speed_command(tmp_path):
    old = 'set_speed = { command = "SPE {speed}", choices = { fast = "FAST", slow = "SLOW" } }'
    path = variant(tmp_path, {r"^set_speed = .*$": old})
    with pytest.raises(DialectError, match=r"operations\.set_speed\.command.*speed header.*PER"):
        load_dialect(path)


def test_another_meter_family_may_keep_a_speed_header_of_that_spelling(tmp_path):
    edits = {
        r"^setup = .*$": 'setup = { command = "FORM:BORD NORM" }',
        r"^set_speed = .*$": (
            'set_speed = { command = "SPE {speed}", '
            'choices = { fast = "F", medium = "M", slow = "S" } }'
        ),
    }
    assert load_dialect(variant(tmp_path, edits)).operations["set_speed"].command == "SPE {speed}"


def test_a_dialect_of_the_previous_release_names_every_rename_and_its_advice_works(tmp_path, sim):
    # The previous release's simulated dialect, as it was shipped (its setup, speed and
    # averaging lines; git history of drivers/dialects/simulated.toml).
    old = {
        r"^setup = .*$": 'setup = { command = "FORM:PAIR RX;FORM:BORD NORM" }',
        r"^set_speed = .*$": (
            'set_speed = { command = "SPE {speed}", '
            'choices = { fast = "FAST", medium = "MED", slow = "SLOW" } }'
        ),
        r"^set_averaging = .*$": 'set_averaging = { command = "AVER:COUN {averaging}" }',
    }
    path = variant(tmp_path, old)
    with pytest.raises(DialectError) as info:
        load_dialect(path)
    message = str(info.value)
    assert "\n" not in message
    assert "key 'operations.setup.command'" in message and "(RX)" in message
    assert message.endswith("; retired words also in operations.set_speed.command")
    # Do what the messages say: the pair's new spelling, then the speed line it gives.
    pair = re.search(r"the simulator now says (.+?) \(see", message).group(1)
    fixed = variant(tmp_path, old | {r"^setup = .*$": f'setup = {{ command = "{pair}" }}'})
    with pytest.raises(DialectError) as info:
        load_dialect(fixed)
    speed_line = re.search(r": write (set_speed = .*)$", str(info.value)).group(1)
    text = re.sub(r"^set_speed = .*$", speed_line, fixed.read_text(), flags=re.MULTILINE)
    fixed.write_text(text)
    with ImpedanceMeter.open(sim.resource, dialect=load_dialect(fixed)) as meter:
        meter.configure(speed="slow")
        z = meter.measure(1e3)
    # R, X of what the simulator shows the meter (its exact impedance; noise is small).
    assert z == pytest.approx(complex(sim.seen_impedance(1e3)), rel=0.01)


@pytest.mark.parametrize(
    ("pattern", "line", "key"),
    [
        (r"^timeout = .*$", "timeout = inf", "connection.timeout"),
        (r"^max = .*$", "max = nan", "frequency.max"),
        (r"^settle = .*$", "settle = inf", "sequence.settle"),
    ],
)
def test_times_and_frequencies_must_be_finite(tmp_path, pattern, line, key):
    # A timeout of inf would never end, a NaN limit compares false with everything: both are
    # refused on load, like any other impossible value, naming the key.
    with pytest.raises(DialectError, match=rf"{key}.*finite"):
        load_dialect(variant(tmp_path, {pattern: line}))
