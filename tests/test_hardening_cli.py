"""The command line against hostile input: markup in names, bytes that are not UTF-8, an ASCII
terminal, and store URLs or paths that name no store.

Sources of the expected behaviour:
- RFC 3986, section 3.2: in ``scheme://`` the two slashes begin an authority (a host), so
  ``sqlite://acquire.db`` names a host, not a file; SQLAlchemy's documentation ("Engine
  Configuration", SQLite) gives ``sqlite:///relative.db`` and ``sqlite:////absolute.db``.
- PEP 383: bytes of a command line that do not decode reach Python as lone surrogates
  U+DC80..U+DCFF; encoding them back with "surrogateescape" gives the original bytes.
- PEP 538 and PEP 540: under ``LANG=C`` Python reads the command line as UTF-8.
- The SQLite file format (sqlite.org/fileformat.html, 1.3): a database file starts with the 16
  bytes "SQLite format 3\\0".
Every other expected value is the user's own input, expected back verbatim.
"""

from __future__ import annotations

import contextlib
import io
import os
import sqlite3
import subprocess
import sys
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pytest
from bench_support import keyboard_putting_in
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from acquire.cli import main
from acquire.compensation import ReferenceSet
from acquire.errors import StoreError
from acquire.store import MeasurementRecord, UnitRecord, open_store
from acquire.store.url import parse_store_url
from drivers.simulator import running

ROOT = Path(__file__).resolve().parents[1]

#: The read-only commands, each with the arguments it needs besides --store.
READ_ONLY = [
    ["reference", "list"],
    ["reference", "show", "latest"],
    ["reference", "check", "latest"],
    ["reference", "export", "latest", "OUT/set.json"],
    ["sweep", "list"],
    ["sweep", "show", "1"],
    ["sweep", "export", "1", "--csv", "OUT/s.csv"],
    ["sweep", "close"],
    ["lot", "L1"],
    ["report", "--lot", "L1", "--out", "OUT/report"],
    ["fit", "1"],
]


@pytest.fixture(autouse=True)
def _no_bench_environment(monkeypatch):
    for name in list(os.environ):
        if name.startswith("ACQUIRE_"):
            monkeypatch.delenv(name)
    monkeypatch.setenv("COLUMNS", "200")


def _args(command: list[str], folder: Path) -> list[str]:
    return [a.replace("OUT/", f"{folder}/") for a in command]


def _one_line(err: str) -> str:
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert "Traceback" not in err
    return lines[0]


# --- item 13: store URLs and stores that are not there --------------------------------------


@pytest.mark.parametrize("command", [*READ_ONLY, ["sweep", "--resource", "X"]])
def test_a_store_url_with_two_slashes_ends_in_one_line_that_gives_three(
    command, tmp_path, monkeypatch, capsys
):
    monkeypatch.chdir(tmp_path)
    code = main([*_args(command, tmp_path), "--store", "sqlite://acquire.db"])
    line = _one_line(capsys.readouterr().err)
    assert code == 2
    assert "sqlite:///acquire.db" in line
    assert list(tmp_path.iterdir()) == []  # nothing was made


@pytest.mark.parametrize(
    "typed, meant",
    [
        ("sqlite://acquire.db", "sqlite:///acquire.db"),
        ("sqlite://data/acquire.db", "sqlite:///data/acquire.db"),
        ("sqlite+pysqlite://acquire.db", "sqlite+pysqlite:///acquire.db"),
        ("sqlite:/acquire.db", "sqlite:///acquire.db"),
        ("sqlite:acquire.db", "sqlite:///acquire.db"),
    ],
)
def test_the_store_url_parser_names_the_url_meant(typed, meant):
    with pytest.raises(StoreError) as caught:
        parse_store_url(typed)
    assert meant in str(caught.value)
    assert "\n" not in str(caught.value)


def test_the_usual_store_urls_still_parse(tmp_path):
    assert parse_store_url("sqlite:///acquire.db").path == Path("acquire.db")
    assert parse_store_url(f"sqlite:///{tmp_path}/a.db").path == tmp_path / "a.db"
    assert parse_store_url("sqlite://").path is None  # in memory
    assert parse_store_url("results.db").path == Path("results.db")


def _unrelated_sqlite(path: Path) -> None:
    with contextlib.closing(sqlite3.connect(path)) as conn:
        conn.execute("CREATE TABLE notes (text TEXT)")
        conn.commit()


@pytest.mark.parametrize("command", READ_ONLY)
@pytest.mark.parametrize("kind", ["missing", "empty file", "other SQLite file", "in memory"])
def test_a_read_only_command_refuses_a_store_that_is_not_there(
    command, kind, tmp_path, monkeypatch, capsys
):
    monkeypatch.chdir(tmp_path)
    typo = tmp_path / "acquier.db"
    if kind == "empty file":
        typo.write_bytes(b"")
    elif kind == "other SQLite file":
        _unrelated_sqlite(typo)
    before = typo.read_bytes() if typo.exists() else None
    url = "sqlite://" if kind == "in memory" else f"sqlite:///{typo}"
    code = main([*_args(command, tmp_path), "--store", url])
    line = _one_line(capsys.readouterr().err)
    assert code == 2
    assert "no results store" in line
    after = typo.read_bytes() if typo.exists() else None
    assert after == before  # not made, not written into
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(
        [typo.name] if before is not None else []
    )


def test_a_read_only_command_refuses_a_mistyped_postgresql_schema(capsys):
    from sqlalchemy import create_engine, text
    from store_support import require_postgres

    url = require_postgres()
    schema = f"acquire_typo_{os.getpid()}"
    code = main(["sweep", "list", "--store", f"{url}?schema={schema}"])
    line = _one_line(capsys.readouterr().err)
    assert code == 2 and "no results store" in line
    engine = create_engine(url.replace("postgresql://", "postgresql+psycopg://", 1))
    try:
        with engine.connect() as conn:
            found = conn.execute(
                text("SELECT 1 FROM information_schema.schemata WHERE schema_name = :s"),
                {"s": schema},
            ).first()
    finally:
        engine.dispose()
    assert found is None  # the mistyped schema was not created


def test_a_write_command_still_makes_a_new_store(tmp_path, capsys):
    refs = ReferenceSet(
        frequency=np.array([1e3, 1e4]),
        open=np.array([1e-3 - 1e6j, 1e-3 - 1e5j]),
        short=np.array([0.02 + 0.001j, 0.02 + 0.01j]),
        fixture="jig",
        captured_at=datetime(2026, 3, 2, tzinfo=UTC),
    )
    refs.save(tmp_path / "set.json")
    url = f"sqlite:///{tmp_path / 'new.db'}"
    assert main(["reference", "import", str(tmp_path / "set.json"), "--store", url]) == 0
    assert "made a new results store" in capsys.readouterr().out
    assert main(["reference", "list", "--store", url]) == 0


# --- item 7: bytes that are not UTF-8, and an ASCII-only terminal -----------------------------


def _ascii_env() -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("ACQUIRE_", "LC_"))}
    env.update(PYTHONIOENCODING="ascii", LANG="C", COLUMNS="120")
    return env


def _run_bytes(*args: bytes | str, timeout: float = 90) -> subprocess.CompletedProcess:
    argv = [sys.executable.encode(), b"-m", b"acquire"]
    argv += [a if isinstance(a, bytes) else os.fsencode(a) for a in args]
    return subprocess.run(argv, capture_output=True, timeout=timeout, cwd=ROOT, env=_ascii_env())


def test_a_sweep_named_in_micro_ohm_and_plus_minus_on_an_ascii_terminal_is_stored_complete(
    tmp_path,
):
    url = f"sqlite:///{tmp_path / 'a.db'}"
    dut, fixture = "coil 47µH ±5 %", "jig Ω"
    csv = os.fsencode(str(tmp_path)) + b"/caf\xe9.csv"  # a Latin-1 file name: not UTF-8
    with running(dut="air-core-coil", fixture="bench-leads", seed=7, measure_time=0) as sim:
        done = _run_bytes(
            "sweep", "--resource", sim.resource, "--store", url, "--points", "9",
            "--start", "1kHz", "--stop", "100kHz", "--no-live", "--uncertainty",
            "--dut", dut, "--fixture", fixture, "--csv", csv,
        )  # fmt: skip
    err = done.stderr.decode("ascii", "replace")
    assert done.returncode == 0, err
    assert b"Traceback" not in done.stderr
    # ASCII only, as the terminal asked, but for the file name's own byte, written back as typed
    assert b"CSV written to " + csv in done.stdout
    out = done.stdout.replace(csv, b"FILE").decode("ascii")
    assert "Ls=" in out and "+/-" in out  # values with their uncertainty, spelled in ASCII
    assert "sweep complete: 9 points saved as sweep 1" in " ".join(out.split())
    assert os.path.exists(csv)
    with open_store(url) as store:
        info = store.sweep_info(1)
        assert (info.status, info.points, info.dut) == ("complete", 9, dut)
        assert store.fixture(info.fixture_id).name == fixture


def test_a_name_that_is_not_utf8_is_refused_in_one_line_before_anything_is_stored(tmp_path):
    url = f"sqlite:///{tmp_path / 'b.db'}"
    with running(dut="air-core-coil", fixture="bench-leads", seed=8, measure_time=0) as sim:
        done = _run_bytes(
            "sweep", "--resource", sim.resource, "--store", url, "--points", "5",
            "--no-live", "--dut", b"coil \xff\xfe",
        )  # fmt: skip
    line = _one_line(done.stderr.decode("ascii", "replace"))
    assert done.returncode == 2
    assert "--dut" in line and "UTF-8" in line
    with open_store(url) as store:
        assert store.list_sweeps() == []


@pytest.mark.parametrize(
    "args",
    [
        ["reference", "show", b"set \xe9"],
        ["reference", "list"],
        ["sweep", "list", "--dut", b"\xff"],
        ["sweep", "show", b"\xff"],
        ["lot", b"lot \xe9"],
        ["fit", b"\xff.csv"],
        ["reference", "capture", "--help"],
        ["sweep", "--help"],
    ],
)
def test_read_commands_on_an_ascii_terminal_end_in_a_value_or_one_line(args, tmp_path):
    url = f"sqlite:///{tmp_path / 'c.db'}"
    with open_store(url) as store:
        refs = ReferenceSet(
            frequency=np.array([1e3, 1e4]),
            open=np.array([1e-3 - 1e6j, 1e-3 - 1e5j]),
            short=np.array([0.02 + 0.001j, 0.02 + 0.01j]),
            fixture="jig Ω ±",
            notes="µ",
            captured_at=datetime(2026, 3, 2, tzinfo=UTC),
        )
        store.save_reference_set(refs, name="set µΩ", fixture_id=store.record_fixture("jig Ω ±"))
    done = _run_bytes(*args, "--store", url)
    assert b"Traceback" not in done.stderr, done.stderr.decode("ascii", "replace")
    if done.returncode == 0:
        assert done.stdout.strip()
        done.stdout.decode("ascii")  # every byte is ASCII
    else:
        assert done.returncode == 2
        _one_line(done.stderr.decode("ascii", "replace"))


def test_a_path_that_is_not_utf8_names_the_missing_store_byte_for_byte(tmp_path):
    typo = os.fsencode(str(tmp_path)) + b"/caf\xe9.db"
    done = subprocess.run(
        [sys.executable.encode(), b"-m", b"acquire", b"sweep", b"list", b"--store", typo],
        capture_output=True,
        timeout=60,
        cwd=ROOT,
        env={**_ascii_env(), "PYTHONIOENCODING": "utf-8"},
    )
    assert done.returncode == 2
    assert typo in done.stderr and b"Traceback" not in done.stderr
    assert not os.path.exists(typo)


# --- item 3: names are data -------------------------------------------------------------------

MARKUP_FIXTURE = "[/]"
MARKUP_SET = "[bold]x"
MARKUP_NOTE = "[/] [red]n [link=file:///etc]x[/link] :x:"


def test_markup_in_fixture_set_name_and_note_prints_literally_and_the_store_stays_listable(
    tmp_path, monkeypatch, capsys
):
    url = f"sqlite:///{tmp_path / 'm.db'}"
    with running(dut="open", fixture="bench-leads", seed=5, measure_time=0) as sim:
        monkeypatch.setattr("builtins.input", keyboard_putting_in(sim))
        code = main(
            ["reference", "capture", "--resource", sim.resource, "--store", url, "--points", "5",
             "--start", "1kHz", "--stop", "100kHz", "--fixture", MARKUP_FIXTURE,
             "--name", MARKUP_SET, "--notes", MARKUP_NOTE, "--repeats", "1"]
        )  # fmt: skip
        out = capsys.readouterr().out
        assert code == 0
        assert f"saved reference set 1 ({MARKUP_SET!r}" in out
        sim.insert("air-core-coil")
        code = main(
            ["sweep", "--resource", sim.resource, "--store", url, "--points", "5",
             "--start", "1kHz", "--stop", "100kHz", "--reference", MARKUP_SET,
             "--dut", MARKUP_SET, "--fixture", MARKUP_FIXTURE, "--no-live"]
        )  # fmt: skip
        assert code == 0
        capsys.readouterr()
    assert main(["reference", "list", "--store", url]) == 0
    listed = capsys.readouterr().out
    assert MARKUP_SET in listed and MARKUP_FIXTURE in listed
    assert main(["reference", "show", "1", "--store", url]) == 0
    shown = capsys.readouterr().out
    assert f"on fixture {MARKUP_FIXTURE}," in shown and f"notes: {MARKUP_NOTE}" in shown
    assert main(["sweep", "list", "--store", url]) == 0
    assert MARKUP_SET in capsys.readouterr().out
    assert main(["sweep", "show", "1", "--store", url]) == 0
    assert f"DUT {MARKUP_SET}, started" in capsys.readouterr().out


#: Names an attacker or an unlucky paste may give: quotes, SQL, markup, control characters,
#: a very long name, right-to-left text.
HOSTILE = [
    'O\'Brien "quoted"',
    "x'; DROP TABLE units; --",
    "1' OR '1'='1",
    "[/]",
    "[bold red]x[/] :x: [link=file:///etc/passwd]y[/link]",
    "tab\tbell\x07escape\x1b[2Jend",
    "cr\rlf\nback\bdel\x7f",
    "x" * 10_000,
    "\u05e9\u05dc\u05d5\u05dd \u0645\u0631\u062d\u0628\u0627 \u202eevil\u202c",
    "%s %d {0} {name} \\N{BELL}",
    " leading and trailing ",
]

hostile = st.one_of(
    st.sampled_from(HOSTILE),
    st.text(st.characters(blacklist_categories=("Cs",), blacklist_characters="\x00"), min_size=1),
)


def _printable(text: str) -> bool:
    return text.isprintable() and text == " ".join(text.split()) and len(text) < 200


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(serial=hostile, lot=hostile, operator=hostile, dut=hostile, fixture=hostile)
def test_hostile_names_round_trip_through_the_store_and_print(serial, lot, operator, dut, fixture):
    import tempfile

    with tempfile.TemporaryDirectory() as folder:
        url = f"sqlite:///{folder}/h.db"
        with open_store(url) as store:
            fixture_id = store.record_fixture(fixture)
            refs = ReferenceSet(
                frequency=np.array([1e3, 1e4]),
                open=np.array([1e-3 - 1e6j, 1e-3 - 1e5j]),
                short=np.array([0.02 + 0.001j, 0.02 + 0.01j]),
                fixture=fixture,
                notes=operator,
                captured_at=datetime(2026, 3, 2, tzinfo=UTC),
            )
            ref_id = store.save_reference_set(refs, name=dut, fixture_id=fixture_id)
            writer = store.begin_sweep(dut=dut, fixture_id=fixture_id, reference_set_id=ref_id)
            writer.add_points(np.array([1e3]), np.array([1 + 1j]))
            writer.finish()
            unit = UnitRecord(
                serial=serial, outcome="pass", lot=lot, operator=operator, station=fixture,
                measurements=[MeasurementRecord("Ls", 1e-5, "H", 1e3, verdict="pass")],
            )  # fmt: skip
            store.save_unit(unit)
            assert store.fixture(fixture_id).name == fixture
            info = store.reference_set_info(ref_id)
            assert (info.name, info.fixture) == (dut, fixture)
            assert store.load_reference_set(ref_id).notes == operator
            assert store.sweep_info(writer.id).dut == dut
            back = store.load_unit(unit.attempt_id)
            assert (back.serial, back.lot, back.operator, back.station) == (
                serial, lot, operator, fixture,
            )  # fmt: skip
        store_ = ["--store", url]
        commands = [
            (["reference", "list", *store_], [dut, fixture]),
            (["reference", "show", *store_, str(ref_id)], [fixture]),
            (["sweep", "list", *store_], [dut, fixture]),
            (["sweep", "show", *store_, str(writer.id)], [dut]),
            (["lot", *store_, "--", lot], [lot]),
        ]
        for args, names in commands:
            out, err = io.StringIO(), io.StringIO()
            with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
                code = main(args)
            assert code == 0, (args, err.getvalue())
            for name in names:
                if _printable(name):
                    assert name in out.getvalue(), (args, name)


def test_a_progress_line_that_cannot_be_written_does_not_stop_the_sweep(
    tmp_path, monkeypatch, capsys
):
    def unwritable(self):
        raise OSError(5, "Input/output error")  # a terminal that went away mid-sweep

    monkeypatch.setattr("acquire.sweep_text.PlainProgress.update", unwritable)
    url = f"sqlite:///{tmp_path / 'p.db'}"
    with running(dut="air-core-coil", fixture="bench-leads", seed=9, measure_time=0) as sim:
        code = main(["sweep", "--resource", sim.resource, "--store", url, "--points", "7",
                     "--no-live"])  # fmt: skip
    assert code == 0, capsys.readouterr().err
    with open_store(url) as store:
        info = store.sweep_info(1)
        assert (info.status, info.points) == ("complete", 7)


def test_json_on_an_ascii_terminal_keeps_every_character_as_an_escape():
    import json

    done = _run_bytes(
        "predict", "--turns", "150", "--diameter", "30mm", "--length", "45mm", "--awg", "30",
        "--json",
    )  # fmt: skip
    assert done.returncode == 0 and b"Traceback" not in done.stderr
    document = json.loads(done.stdout.decode("ascii"))  # RFC 8259, 7: \uXXXX escapes
    units = {q["unit"] for q in document["quantities"]}
    assert "Ω" in units  # the unit itself, not a spelling of it
