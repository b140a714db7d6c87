"""Files a user or a client hands us end in a value or in the project's own one-line error.

Items 5 (dialect files), 6 (simulator profiles), 8 (the reference-set file) and 12 (which
profiles a client of the simulator may name). The property tests at the end feed arbitrary
texts to each reader: whatever the text, the reader returns a value or raises its own error
(DialectError, ProfileError, CompensationError), never another exception.
"""

from __future__ import annotations

import asyncio
import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import pyvisa
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from acquire.cli import main
from acquire.compensation import refs_file
from acquire.compensation.reference_set import ReferenceSet
from acquire.errors import CompensationError
from drivers.dialect import DIRECTORY
from drivers.dialect_file import load_dialect
from drivers.errors import DialectError, ProfileError
from drivers.simulator.commands import Commands
from drivers.simulator.instrument import Instrument, Session
from drivers.simulator.profiles import load_dut, load_fixture, load_meter

TEMPLATE = (DIRECTORY / "template.toml").read_text(encoding="utf-8")
#: The largest finite IEEE 754 binary64 number (IEEE 754-2019, 3.6; Python's sys.float_info.max).
FLOAT_MAX = 1.7976931348623157e308
#: Python refuses to turn an integer text of more digits than this into an int (Python 3.11
#: documentation, "Integer string conversion length limitation": the default limit is 4300).
PYTHON_DIGIT_LIMIT = 4300
COIL = 'kind = "coil"\ninductance = 1e-5\ndc_resistance = 0.1\n'


def one_line(message: str) -> None:
    assert message and "\n" not in message and "Traceback" not in message


# ----------------------------------------------------------------------------------------------
# Item 5: dialect files


def dialect(tmp_path: Path, old: str, new: str) -> Path:
    assert old in TEMPLATE, old
    path = tmp_path / "mine.toml"
    path.write_text(TEMPLATE.replace(old, new, 1), encoding="utf-8")
    return path


def refused(path: Path, *words: str) -> str:
    with pytest.raises(DialectError) as info:
        load_dialect(path)
    message = str(info.value)
    one_line(message)
    for word in words:
        assert word in message
    return message


@pytest.mark.parametrize(
    ("old", "new", "key"),
    [
        ("timeout = 5.0 ", "timeout = nan ", "connection.timeout"),
        ("timeout = 5.0 ", "timeout = inf ", "connection.timeout"),
        ("settle = 0.0", "settle = inf", "sequence.settle"),
        ("max = 30.0e6", "max = inf", "frequency.max"),
        ("min = 10.0 ", "min = nan ", "frequency.min"),
    ],
)
def test_dialect_refuses_times_and_frequency_limits_that_are_not_finite(tmp_path, old, new, key):
    """Regression guard: a timeout of inf never ends, a NaN limit compares false with every
    frequency (IEEE 754-2019, 5.11: NaN is unordered). Already refused on this branch."""
    refused(dialect(tmp_path, old, new), key, "finite")


@pytest.mark.parametrize("name", ["\\u0000", "ascii\\u0000", "utf_8\\u0000"])
def test_dialect_refuses_an_encoding_with_a_nul(tmp_path, name):
    """Before: ValueError "embedded null character" from the codec lookup."""
    path = dialect(tmp_path, 'encoding = "ascii"', f'encoding = "{name}"')
    refused(path, "connection.encoding")


@pytest.mark.parametrize("name", ["utf-16", "utf-32", "utf-7", "cp037"])
def test_dialect_refuses_an_encoding_that_does_not_carry_ascii_as_is(tmp_path, name):
    """IEEE 488.2-1992 (from memory): program and response messages are coded in 7-bit ASCII, so
    the encoding must send every ASCII character as its own single byte (UTF-16 adds zero
    bytes and a byte-order mark, UTF-7 rewrites '+', EBCDIC moves every letter)."""
    path = dialect(tmp_path, 'encoding = "ascii"', f'encoding = "{name}"')
    refused(path, "connection.encoding", "ASCII")


@pytest.mark.parametrize(
    ("old", "new", "key"),
    [
        ('read_termination = "\\n"', 'read_termination = "é"', "connection.read_termination"),
        ('write_termination = "\\n"', 'write_termination = "\\u2028"', "write_termination"),
        ('separator = ";"\n', 'separator = "¶"\n', "connection.separator"),
        ('reply_separator = ";"', 'reply_separator = "\\u00a0"', "connection.reply_separator"),
    ],
)
def test_dialect_refuses_terminations_and_separators_outside_ascii(tmp_path, old, new, key):
    """IEEE 488.2-1992 (from memory): a program message ends in NL (ASCII LF), and its
    units are joined by ASCII ';'; a character outside ASCII is no terminator a meter sends."""
    refused(dialect(tmp_path, old, new), key, "ASCII")


@pytest.mark.parametrize(
    ("old", "new"),
    [
        ("min = 0.002", "min = nan"),
        ("max = 3.0 }", "max = inf }"),
        ("min = 1, max = 500", "min = -inf, max = 500"),
    ],
)
def test_dialect_refuses_operation_limits_that_are_not_finite(tmp_path, old, new):
    """Before: accepted; a NaN limit lets every value through (every comparison with NaN is
    false, IEEE 754-2019, 5.11)."""
    refused(dialect(tmp_path, old, new), "finite")


@pytest.mark.parametrize(
    ("old", "new", "key"),
    [
        ("max = 500", "max = 1" + "0" * 400, "operations.set_averaging.max"),
        ("relative = 0.001", "relative = 1" + "0" * 400, "accuracy.relative"),
        ("retries = 2 ", "retries = " + "9" * 5000 + " ", ""),
        ("schema = 1 ", "schema = " + "9" * 5000 + " ", ""),
        ("warning_codes = []", "warning_codes = [40000]", "errors.warning_codes"),
        ("warning_codes = []", "warning_codes = [" + "9" * 5000 + "]", ""),
    ],
)
def test_dialect_huge_integers_end_in_a_dialect_error(tmp_path, old, new, key):
    """TOML v1.0.0 ("Integer"): an integer that cannot be held losslessly in 64 bits must be an
    error; a 401-digit one is beyond binary64 too (max about 1.8e308). SCPI-99 volume 1, 21.8
    (from memory): error numbers lie in -32768..32767. Before: OverflowError, or ValueError from
    Python's 4300-digit limit, or accepted."""
    assert PYTHON_DIGIT_LIMIT < 5000
    refused(dialect(tmp_path, old, new), key)


def test_dialect_file_of_invalid_utf8_is_refused(tmp_path):
    """RFC 3629, 3: the byte 0xFF never appears in UTF-8; TOML v1.0.0 files are UTF-8."""
    path = tmp_path / "bad.toml"
    path.write_bytes(TEMPLATE.encode() + b"\n# \xff\xfe\n")
    refused(path, "UTF-8")


# ----------------------------------------------------------------------------------------------
# Item 6: simulator profiles


def profile(tmp_path: Path, data: bytes | str, name: str = "p") -> Path:
    path = tmp_path / f"{name}.toml"
    path.write_bytes(data.encode() if isinstance(data, str) else data)
    return path


def profile_refused(path: Path, load=load_dut, *words: str) -> str:
    with pytest.raises(ProfileError) as info:
        load(path)
    message = str(info.value)
    one_line(message)
    assert len(message) < 400, message
    for word in words:
        assert word in message
    return message


@pytest.mark.parametrize(
    ("text", "words"),
    [
        (COIL.encode() + b'description = "\xff\xfe"\n', ("UTF-8",)),
        (COIL.replace("1e-5", "1" + "0" * 400), ("inductance",)),
        (COIL.replace("1e-5", "9" * 5000), ()),
        (COIL + "[spread]\ninductance = 1" + "0" * 400 + "\n", ("spread",)),
        (COIL + '[[faults]]\nkind = "drop"\nn = inf\n', ("faults[0]",)),
        (COIL + '[[faults]]\nkind = "drop"\nn = -inf\n', ("faults[0]",)),
        (COIL + '[[faults]]\nkind = "drop"\nn = 1' + "0" * 400 + "\n", ("faults[0]",)),
        (COIL + '[[faults]]\nkind = "error"\ncode = inf\n', ("faults[0]",)),
        (COIL + '[[faults]]\nkind = "error"\ncode = 1' + "0" * 30 + "\n", ("faults[0]",)),
        (COIL + '[[faults]]\nkind = "overrange"\nfrequency = 1' + "0" * 400 + "\n", ("faults",)),
    ],
)
def test_profile_mistakes_end_in_a_profile_error(tmp_path, text, words):
    """RFC 3629 (0xFF is never UTF-8); TOML v1.0.0 (integers beyond 64 bits are an error;
    floats are binary64, max about 1.8e308); a fault count must be a whole number (inf is none);
    SCPI-99 volume 1, 21.8 (from memory): error numbers lie in -32768..32767. Before:
    UnicodeDecodeError, OverflowError, ValueError, or accepted."""
    profile_refused(profile(tmp_path, text), load_dut, *words)


def test_fixture_and_meter_profiles_with_huge_numbers_end_in_a_profile_error(tmp_path):
    """IEEE 754-2019 binary64 holds at most about 1.8e308; before: OverflowError."""
    fixture = profile(
        tmp_path,
        'kind = "fixture"\nseries_resistance = 1' + "0" * 400 + "\nseries_inductance = 0\n"
        "shunt_capacitance = 0\nshunt_conductance = 0\n",
        "f",
    )
    profile_refused(fixture, load_fixture, "series_resistance")
    meter = (sim_profiles_dir() / "simulated-meter.toml").read_text(encoding="utf-8")
    assert "accuracy_class =" in meter
    path = profile(tmp_path, meter.replace("accuracy_class =", "accuracy_class = 1e999 #"), "m")
    profile_refused(path, load_meter, "accuracy_class")


def sim_profiles_dir() -> Path:
    import sim_profiles

    return Path(sim_profiles.DIRECTORY)


def test_acquire_sim_with_a_broken_profile_prints_one_line(tmp_path, capsys):
    """The command line turns the project's errors into one line and exit code 2; before, an
    infinite fault count raised OverflowError through it (a traceback)."""
    path = profile(tmp_path, COIL + '[[faults]]\nkind = "stall"\nn = inf\n')
    code = main(["sim", "--profile", str(path), "--port", "0", "--quiet"])
    err = capsys.readouterr().err
    assert code == 2
    one_line(err.strip())


# ----------------------------------------------------------------------------------------------
# Item 8: the reference-set file


def reference_set() -> ReferenceSet:
    f = np.array([1e3, 1e4, 1e5])
    return ReferenceSet(
        frequency=f,
        open=1 / (1j * 2 * np.pi * f * 1e-12) + 1e9,
        short=0.02 + 1j * 2 * np.pi * f * 20e-9,
        notes="bench 3",
    )


def signed(d: dict) -> str:
    body = {k: v for k, v in d.items() if k != "sha256"}
    try:
        digest = refs_file._digest(body)
    except (ValueError, UnicodeEncodeError):
        digest = "0" * 64
    return json.dumps(dict(body, sha256=digest), allow_nan=True)


def read_refused(tmp_path: Path, text: str, *words: str) -> str:
    path = tmp_path / "refs.json"
    path.write_text(text, encoding="utf-8", errors="surrogatepass")
    with pytest.raises(CompensationError) as info:
        ReferenceSet.read(path)
    message = str(info.value)
    one_line(message)
    assert len(message) < 500, message
    for word in words:
        assert word in message
    return message


def test_a_valid_reference_file_still_reads_back_bit_for_bit(tmp_path):
    """The guard against over-eager fixes: a saved set reads back equal (IEEE 754 binary64
    round trip of Python's repr, Python documentation of float.__repr__)."""
    refs = reference_set()
    refs.save(tmp_path / "ok.json")
    back = ReferenceSet.read(tmp_path / "ok.json")
    assert np.array_equal(back.open, refs.open) and np.array_equal(back.frequency, refs.frequency)


@pytest.mark.parametrize("number", ["1e400", "-1e400", "1E+999", "123.0e99999"])
def test_a_huge_exponent_in_a_reference_file_is_refused(tmp_path, number):
    """RFC 8259, 6: an implementation may limit the range of numbers; a number beyond binary64
    (IEEE 754-2019, max about 1.8e308) is refused rather than read as infinity. Before:
    ValueError "Out of range float values are not JSON compliant" from the digest."""
    good = signed(reference_set().to_dict())
    assert "1000.0" in good
    read_refused(tmp_path, good.replace("1000.0", number, 1), "number")


@pytest.mark.parametrize("digits", [309, 400, 4000, 5000])
def test_a_huge_integer_in_a_reference_file_is_refused(tmp_path, digits):
    """A 309-digit integer is above binary64's largest value (about 1.8e308, IEEE 754-2019);
    before: OverflowError from numpy, or (beyond 4300 digits) a long message naming Python's
    sys.set_int_max_str_digits."""
    assert int("9" * min(digits, 400)) > FLOAT_MAX
    good = signed(reference_set().to_dict())
    read_refused(tmp_path, good.replace("1000.0", "9" * digits, 1), "number")


def test_a_huge_temperature_in_a_reference_file_is_refused(tmp_path):
    d = reference_set().to_dict()
    d["temperature_c"] = 10**400
    read_refused(tmp_path, signed(d), "number")
    with pytest.raises(CompensationError, match="temperature_c"):
        ReferenceSet.from_dict(d)


def test_from_dict_with_a_huge_integer_is_refused():
    """The store hands fields_from_dict objects too; before: OverflowError."""
    d = reference_set().to_dict()
    d["impedance_ohm"]["open"]["real"] = [10**400, 1.0, 1.0]
    with pytest.raises(CompensationError, match="open.real"):
        ReferenceSet.from_dict(d)


def test_deeply_nested_json_is_refused(tmp_path):
    """RFC 8259, 9: an implementation may limit the depth of nesting. Before: RecursionError."""
    read_refused(tmp_path, "[" * 100_000 + "]" * 100_000)
    d = reference_set().to_dict()
    text = signed(d).replace('"notes": "bench 3"', '"notes": ' + "[" * 50_000 + "]" * 50_000)
    read_refused(tmp_path, text)


def test_a_capture_time_beyond_the_calendar_is_refused(tmp_path):
    """Python's datetime holds years 1 to 9999 (datetime.MINYEAR/MAXYEAR); year 1 at +14:00 is
    before that in UTC. Before: OverflowError "date value out of range"."""
    d = reference_set().to_dict()
    d["captured_at"] = "0001-01-01T00:00:00+14:00"
    read_refused(tmp_path, signed(d), "captured_at")


def test_a_lone_surrogate_in_a_reference_file_is_refused(tmp_path):
    """RFC 8259, 8.2: a string with an unpaired surrogate escape is not Unicode text; before:
    UnicodeEncodeError from the digest."""
    text = signed(reference_set().to_dict()).replace('"bench 3"', '"bench \\ud800"')
    read_refused(tmp_path, text)


def test_saving_notes_with_a_lone_surrogate_is_refused(tmp_path):
    """Text from a non-UTF-8 argument carries surrogate escapes (PEP 383); before:
    UnicodeEncodeError while writing."""
    refs = ReferenceSet(frequency=np.array([1e3]), short=np.array([0.1 + 0j]), notes="a\udcff")
    with pytest.raises(CompensationError) as info:
        refs.save(tmp_path / "s.json")
    one_line(str(info.value))
    assert not list(tmp_path.iterdir())


def test_an_oversized_reference_file_is_refused_by_its_size(tmp_path):
    """RFC 8259, 9: an implementation may limit the size of texts it accepts. The reader says
    the limit instead of reading the whole file."""
    path = tmp_path / "big.json"
    with path.open("wb") as out:
        out.truncate(refs_file.MAX_FILE_BYTES + 1)  # sparse: no disk used
    with pytest.raises(CompensationError) as info:
        ReferenceSet.read(path)
    message = str(info.value)
    one_line(message)
    assert "MiB" in message and str(refs_file.MAX_FILE_BYTES // 2**20) in message


# ----------------------------------------------------------------------------------------------
# Item 12: which profiles a client of the simulator may name


def run_scpi(instrument: Instrument, *messages: str) -> list[str]:
    """Each message's reply (or "") through the command table, as the server runs them."""

    async def go() -> list[str]:
        commands, session = Commands(instrument), Session("test")
        out = []
        for message in messages:
            reply = await commands.execute(session, message)
            out.append("" if reply is None else reply.decode("ascii"))
        return out

    return asyncio.run(go())


def errors_of(instrument: Instrument, message: str) -> list[str]:
    replies = run_scpi(instrument, message, *["SYST:ERR?"] * 4)
    return [r for r in replies[1:] if not r.startswith("0,")]


def test_a_client_cannot_open_a_host_file_by_path(tmp_path):
    """Before: SIM:DUT "<path>" loaded any TOML file of the host."""
    path = profile(tmp_path, COIL, "secret-coil")
    inst = Instrument(measure_time=0)
    errors = errors_of(inst, f'SIM:DUT "{path}"')
    assert len(errors) == 1 and errors[0].startswith("-224,")
    assert str(tmp_path) not in errors[0]
    assert inst.dut.name == "air-core-coil"


def test_the_reply_does_not_tell_whether_a_host_file_exists_or_how_it_parses(tmp_path):
    """Before: "no such profile file" for a missing file, "not valid TOML ... (at line 1,
    column 5)" for a present one: a client could probe the host's files."""
    present = profile(tmp_path, "not toml at all\n", "present")
    inst = Instrument(measure_time=0)
    replies = {
        errors_of(inst, f'SIM:DUT "{present}"')[0],
        errors_of(inst, f'SIM:DUT "{tmp_path / "absent.toml"}"')[0],
        errors_of(inst, f'SIM:FIXT "{present}"')[0].replace("fixture", "DUT"),
    }
    assert len(replies) == 1, replies
    (reply,) = replies
    assert "line" not in reply and str(tmp_path) not in reply


def test_shipped_profiles_are_named_as_before():
    inst = Instrument(measure_time=0)
    replies = run_scpi(inst, 'SIM:DUT "rf-coil";SIM:FIXT direct;SIM:DUT?;SIM:FIXT?', "SYST:ERR?")
    assert replies == ['"rf-coil";"direct"', '0,"No error"']
    assert run_scpi(inst, "SIM:DUT OPEN;SIM:DUT?") == ['"open"']


def test_a_profile_directory_offers_its_profiles_by_name(tmp_path):
    profile(tmp_path, COIL + '[[faults]]\nkind = "truncate"\nn = 2\n', "flaky-coil")
    profile(tmp_path, "kind = \n", "broken")
    inst = Instrument(measure_time=0, profile_dir=tmp_path)
    assert run_scpi(inst, 'SIM:DUT "flaky-coil";SIM:DUT?') == ['"flaky-coil"']
    assert [f.kind for f in inst.faults.armed] == ["truncate"]
    (error,) = errors_of(inst, "SIM:DUT broken")
    assert error.startswith("-224,") and "log" in error
    assert "line" not in error and str(tmp_path) not in error
    assert inst.dut.name == "flaky-coil"


def test_acquire_sim_serves_profiles_of_its_profile_directory(tmp_path):
    """End to end: `acquire sim --profile-dir DIR` over a real socket (before: argparse refused
    the option with exit code 2)."""
    profile(tmp_path, COIL, "bench-coil")
    command = [sys.executable, "-m", "acquire.cli", "sim", "--port", "0", "--quiet"]
    process = subprocess.Popen(
        [*command, "--profile-dir", str(tmp_path), "--measure-time", "0"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env=dict(os.environ, PYTHONUNBUFFERED="1"),
    )
    try:
        assert process.stdout is not None
        resource = process.stdout.readline().strip()
        assert resource.startswith("TCPIP0::"), process.stderr.read() if process.stderr else ""
        rm = pyvisa.ResourceManager("@py")
        try:
            inst = rm.open_resource(resource, read_termination="\n", write_termination="\n")
            inst.timeout = 5000
            assert inst.query('SIM:DUT "bench-coil";SIM:DUT?') == '"bench-coil"'
            inst.write(f'SIM:DUT "{tmp_path / "bench-coil.toml"}"')
            assert inst.query("SYST:ERR?").startswith("-224,")
            inst.close()
        finally:
            rm.close()
    finally:
        process.terminate()
        process.wait(10)


def test_acquire_sim_refuses_a_profile_directory_that_is_not_one(tmp_path, capsys):
    code = main(["sim", "--port", "0", "--profile-dir", str(tmp_path / "nope")])
    assert code == 2
    one_line(capsys.readouterr().err.strip())


# ----------------------------------------------------------------------------------------------
# Properties: whatever the text, a value or the reader's own error


def toml_float(x: float) -> str:
    if x != x:
        return "nan"
    if x in (float("inf"), float("-inf")):
        return "inf" if x > 0 else "-inf"
    return repr(x)


SCALARS = st.one_of(
    st.integers().map(str),
    st.integers(min_value=300, max_value=5200).map(lambda n: "9" * n),
    st.floats().map(toml_float),
    st.integers(-2000, 2000).map(lambda e: f"1.5e{e}"),
    st.booleans().map(lambda b: "true" if b else "false"),
    st.text(max_size=12).map(lambda s: json.dumps(s)),
    st.sampled_from(['"\\u0000"', '"ascii"', '"utf-16"', '"\\n"', '"\\r\\n"', '""', '"é"']),
    st.sampled_from(["inf", "-inf", "nan", "1" + "0" * 400, "-1e999", "9" * 4400, "0", "-1"]),
)
VALUES = st.recursive(
    SCALARS,
    lambda inner: st.one_of(
        st.lists(inner, max_size=4).map(lambda xs: "[" + ", ".join(xs) + "]"),
        st.dictionaries(st.from_regex(r"[a-z_]{1,10}", fullmatch=True), inner, max_size=3).map(
            lambda d: "{ " + ", ".join(f"{k} = {v}" for k, v in d.items()) + " }"
        ),
    ),
    max_leaves=6,
)


def mutate(text: str, data: st.DataObject) -> str:
    """``text`` with a few of its ``key = value`` lines given arbitrary values or dropped."""
    lines = text.splitlines()
    keyed = [i for i, line in enumerate(lines) if " = " in line and not line.startswith("#")]
    for _ in range(data.draw(st.integers(1, 3))):
        i = data.draw(st.sampled_from(keyed))
        key = lines[i].split(" = ", 1)[0]
        choice = data.draw(st.integers(0, 5))
        lines[i] = "" if choice == 0 else f"{key} = {data.draw(VALUES)}"
    if data.draw(st.booleans()):
        lines.insert(data.draw(st.integers(0, len(lines))), data.draw(st.text(max_size=20)))
    return "\n".join(lines) + "\n"


PROPERTY = settings(
    max_examples=300,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)


@PROPERTY
@given(data=st.data())
def test_any_dialect_text_ends_in_a_dialect_or_a_dialect_error(tmp_path, data):
    path = tmp_path / "any.toml"
    raw = mutate(TEMPLATE, data).encode("utf-8", "surrogatepass")
    if data.draw(st.integers(0, 9)) == 0:
        raw += data.draw(st.binary(max_size=8))
    path.write_bytes(raw)
    try:
        load_dialect(path)
    except DialectError as exc:
        one_line(str(exc))


SHIPPED_TEXTS = [
    (p.read_text(encoding="utf-8"), load)
    for name, load in [
        ("air-core-coil", load_dut),
        ("ferrite-choke", load_dut),
        ("load", load_dut),
        ("bench-leads", load_fixture),
        ("cable-leads", load_fixture),
        ("simulated-meter", load_meter),
    ]
    for p in [sim_profiles_dir() / f"{name}.toml"]
]
FAULTS = '\n[[faults]]\nkind = "drop"\nn = 2\n[[faults]]\nkind = "error"\ncode = -222\n'


@PROPERTY
@given(data=st.data())
def test_any_profile_text_ends_in_a_profile_or_a_profile_error(tmp_path, data):
    text, load = data.draw(st.sampled_from(SHIPPED_TEXTS))
    if load is load_dut:
        text += FAULTS
    path = tmp_path / "any.toml"
    path.write_bytes(mutate(text, data).encode("utf-8", "surrogatepass"))
    try:
        load(path)
    except ProfileError as exc:
        one_line(str(exc))


JSON = st.recursive(
    st.none()
    | st.booleans()
    | st.integers()
    | st.integers(min_value=10**300, max_value=10**400)
    | st.floats(allow_nan=False, allow_infinity=False)
    | st.text(max_size=8)
    | st.sampled_from(["inf", "-inf", "nan", "2024-05-02T09:30:00+00:00", "log"]),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=6), inner),
    max_leaves=8,
)
FIELDS = sorted(reference_set().to_dict())


@PROPERTY
@given(data=st.data())
def test_any_json_ends_in_a_reference_set_or_a_compensation_error(tmp_path, data):
    d = reference_set().to_dict()
    d["uncertainty_ohm"] = {"open": [0.1, 0.1, 0.1]}
    d["repeats"] = 3
    how = data.draw(st.integers(0, 4))
    if how == 0:
        text = json.dumps(data.draw(JSON))
    elif how == 4:
        risky = st.sampled_from(["1e400", "-1E+999", "1" + "0" * 320, "9" * 5000, "[" * 5000])
        text = signed(d).replace(data.draw(st.sampled_from(["1000.0", "0.1"])), data.draw(risky))
    else:
        for _ in range(how):
            field = data.draw(st.sampled_from(FIELDS))
            if isinstance(d[field], dict) and d[field] and data.draw(st.booleans()):
                inner = data.draw(st.sampled_from(sorted(d[field])))
                d[field][inner] = data.draw(JSON)
            else:
                d[field] = data.draw(JSON)
        text = signed(d)
        if data.draw(st.booleans()):
            text = text.replace("1000.0", data.draw(st.sampled_from(["1e400", "1" + "0" * 320])))
    path = tmp_path / "any.json"
    path.write_text(text, encoding="utf-8", errors="surrogatepass")
    try:
        ReferenceSet.read(path)
    except CompensationError as exc:
        one_line(str(exc))
