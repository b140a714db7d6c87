"""The tables of a results store at its newest schema revision.

The store's layout is an interface in its own right: points and measurements are plain rows, so
a query tool or a spreadsheet connected to the database can answer questions directly
("all units of lot X whose Q at 100 kHz was below 40")::

    SELECT u.serial, m.value FROM units u
      JOIN lots l ON l.id = u.lot_id
      JOIN measurements m ON m.unit_id = u.id
     WHERE l.name = 'X' AND m.parameter = 'Q' AND m.frequency = 100000 AND m.value < 40

Values are in SI units (hertz, ohm, henry, ...; ``measurements.si_unit`` names the unit of each
value). Times are UTC. In sweep and reference points an invalid reading (NaN) is NULL and an
overrange one infinity. A measurement's ``value`` is finite or NULL: ``value_special`` is "" for
a finite value, else "nan", "inf" or "-inf" (so SQL averages need no filtering); a DC value has
``frequency`` 0. Each measurement row also carries its unit's ``lot_id`` and test time
(``tested_at``: the unit's ``finished_at``, else ``started_at``, else ``saved_at``), so a lot's
statistics, moving ranges in test order included, read one index (``ix_measurements_lot_order``:
lot, quantity, finite or not, test time, unit, sequence number, then value, verdict and limits)
in its own order instead of joining and sorting every unit. Each unit's row also carries a
read-optimised copy of its readings (``readings_layout``, ``readings``; see
:mod:`acquire.store.packed_readings`), written in the same INSERT; lot statistics read those,
a row per unit, in test order (``ix_units_lot_order``: lot, test time, id). The measurement
rows stay the record.
Names that identify a record (a meter's identity, a fixture's or lot's name, a serial number)
may be of any length; their uniqueness and look-ups go through a SHA-256 ``key`` column.

A sweep point's ``u_r`` and ``u_x`` are the expanded uncertainty (k = 2, ohm) of its corrected R
and X, NULL when unknown; its ``flags`` is "" for a measured value, else comma-separated words
(``overrange``, ``beyond-accuracy``, ...). A reference point's ``open_u``, ``short_u`` and
``load_u`` are the standard uncertainty (ohm, per component) of that standard's mean reading, NULL
when it was read once; ``reference_sets.repeats`` says how many readings were averaged, and
``grid_spacing`` how the capture's frequencies were laid out (``log``, ``linear``, ``list``, or ''
when not known), so a set with missing grid points can be told from an irregular list.

A measurement's ``low_limit`` and ``high_limit`` are the acceptance limits actually applied (the
tolerance limits narrowed by any guard band), ``tolerance_low`` and ``tolerance_high`` the test
plan's tolerance limits (NULL for an open side), and ``uncertainty`` the expanded uncertainty
(k = 2, in the value's SI unit) of the value, NULL when unknown (an infinite one is stored as
infinity). A unit's ``temperature`` is the winding temperature (°C) its DC resistance was
corrected from, NULL when none was used; ``reference_override`` is "" or the reason the operator
gave for measuring with references the station would otherwise have refused;
``check_acknowledgement_id`` the acknowledgement of a stopped check standard in force when the
unit was tested (NULL for none).

A bias sweep (``bias_sweeps``) keeps what was asked: the bias ``currents`` and the ``drops``
(fractions) as JSON lists in text, the measuring ``frequency`` (Hz), the largest bias allowed
(``maximum``, A), the ramp ``step`` (A) and ``dwell`` (s), the ``energy`` (J) stored at the
largest bias, how going ahead was ``confirmed``, and the bias ``supply``; ``bias_points`` one row
per bias step (``setpoint`` and ``applied`` in A, raw and corrected R and X in ohm, corrected
NULL without a reference set, and ``ls`` in H, ``rs`` in ohm, ``q``); ``bias_drops`` the
saturation current (``drop_current``, A, NULL when the drop was not reached up to
``highest_current``) at each ``drop_fraction``. A temperature-rise run (``rise_runs``) keeps
its settings (``current_asked`` in A, ``ambient`` in °C, ``time_limit`` and ``settle_window``
in s, ``settle_tolerance`` and ``target_rise`` in K), the cold resistance ``r_cold`` (ohm) at
``t_cold`` (°C), the ``held_current`` (A), whether the rise ``settled``, and the currents tried
when a rise was searched for (``steps``, a JSON list of [current A, rise K]); ``rise_readings``
the winding's DC resistance (ohm) and rise (K) ``elapsed`` seconds after the current started.
Both record their writer as sweeps do (a ``running`` one whose writer is gone is reported as
interrupted). A measurement's ``bias_current`` is its DC bias (A), NULL for none.

A gauge R&R study (``grr_studies``) keeps its ``name``, the plan (``plan_id``, ``plan_hash``), the
``quantity`` studied (a plan check's key, e.g. ``Ls@100000``) and its SI ``unit``, the numbers of
``parts``, ``operators`` and ``trials``, the operators' names in the order given
(``operator_names``, a JSON list in text), the ``tolerance`` (in the unit, NULL when none was
given), the ``seed`` of the measuring order (decimal text), ``station``, ``meter`` and reference
set, and a writer's status columns; ``grr_measurements`` one row per measurement: ``part``
(1..parts), ``operator`` (a name), ``trial`` (1..trials), ``order_index`` (its place in the
study's measuring order, from 0), ``value`` and ``uncertainty`` (expanded, k = 2; NaN as NULL)
and ``measured_at``.

Revisions: the layout is changed only by Alembic migrations (:mod:`acquire.store.migrations`);
this module describes the newest revision, :data:`SCHEMA_REVISION`. Revision 0001 is the layout
of the first released program (which marked its stores with ``schema_version`` 2); 0002 adds the
uncertainty and flag columns above; 0003 the production columns (uncertainty, tolerance limits,
references override, temperature); 0004 the measurements' test time and the test-order index;
0005 the bias sweeps, temperature-rise runs and a measurement's bias current; 0006 the check
standards, their results and acknowledgements, and a unit's ``check_acknowledgement_id``; 0007
the gauge R&R studies; 0008 the indexes that count a lot's outcomes (each serial's attempts in
order, the failing measurements); 0009 the MQTT publish positions (``publish_positions``);
0010 the line's station states (``station_states``); 0011 the
units of a lot by bin and outcome; 0012 each unit's readings packed into its row
(``readings_layout``, ``readings``; :mod:`acquire.store.packed_readings`), a read-optimised
copy of its measurement rows for lot statistics, and ``ix_units_lot_order``, a lot's units in
test order.
``schema_version`` is kept only so that releases from before
the migrations refuse a newer store: 0002 records version 3 there, which they do not know.
"""

from __future__ import annotations

from sqlalchemy import (
    JSON,
    CheckConstraint,
    Column,
    Double,
    ForeignKey,
    Index,
    Integer,
    LargeBinary,
    MetaData,
    String,
    Table,
    Text,
    text,
)

from acquire.store.check_tables import check_tables
from acquire.store.columns import RUN_STATES as RUN_STATES
from acquire.store.columns import UtcDateTime as UtcDateTime
from acquire.store.columns import _id, _real, _ref, _text
from acquire.store.line_tables import line_tables
from acquire.store.plain_values import identity_key as identity_key
from acquire.store.plain_values import utc_now as utc_now
from acquire.store.publish_tables import publish_tables
from acquire.store.run_tables import bias_tables, grr_tables

#: The newest schema revision (the Alembic revision id of ``migrations/versions/0012_*.py``).
SCHEMA_REVISION = "0012"
#: The condition of ``ix_measurements_failing``: a verdict that counts a check as failing
#: (not a pass, a conditional pass or "" (not judged); acquire.store.lot_query.NOT_FAILING).
FAILING_VERDICT = "verdict NOT IN ('pass', 'conditional pass', '')"
#: A unit's test time (what its measurements' ``tested_at`` holds), as ``ix_units_lot_order``
#: and the lot statistics' query write it.
UNIT_TEST_TIME = "coalesce(finished_at, started_at, saved_at)"
#: Sweep states as stored.
SWEEP_STATES = ("running", "complete", "interrupted")


def build_metadata() -> MetaData:
    """The tables of the newest schema revision (:data:`SCHEMA_REVISION`).

    The store's code reads and writes through these tables. A store's tables are made by the
    migrations (:mod:`acquire.store.migrations`), never from here: a test checks that running every
    migration from an empty database gives exactly this layout.
    """
    md = MetaData()
    Table(
        "schema_version",
        md,
        Column("version", Integer, primary_key=True, autoincrement=False),
        Column("applied_at", UtcDateTime, nullable=False),
        _text("note"),
    )
    Table(
        "meters",
        md,
        _id(),
        Column("key", String(64), nullable=False, unique=True),
        _text("manufacturer"),
        _text("model"),
        _text("serial"),
        _text("firmware"),
        _text("dialect"),
        Column("first_seen", UtcDateTime, nullable=False),
    )
    Table(
        "fixtures",
        md,
        _id(),
        Column("key", String(64), nullable=False, unique=True),
        _text("name"),
        _text("notes"),
        Column("created_at", UtcDateTime, nullable=False),
    )
    Table(
        "reference_sets",
        md,
        _id(),
        _text("name"),
        _ref("fixture_id", "fixtures"),
        _ref("meter_id", "meters"),
        _text("fixture"),
        _text("meter"),
        Column("captured_at", UtcDateTime, nullable=True),
        _real("temperature"),
        _text("notes"),
        _text("method"),
        _text("standards"),
        Column("points", Integer, nullable=False),
        Column("saved_at", UtcDateTime, nullable=False),
        Column("repeats", Integer, nullable=False, default=1, server_default=text("1")),
        Column("grid_spacing", Text, nullable=False, default="", server_default=""),
    )
    Table(
        "reference_points",
        md,
        Column("reference_set_id", Integer, ForeignKey("reference_sets.id"), primary_key=True),
        Column("idx", Integer, primary_key=True, autoincrement=False),
        Column("frequency", Double, nullable=False),
        *(
            _real(f"{std}_{part}")
            for std in ("open", "short", "load", "load_true")
            for part in "rx"
        ),
        *(_real(f"{std}_u") for std in ("open", "short", "load")),
        sqlite_with_rowid=False,
    )
    Table(
        "sweeps",
        md,
        _id(),
        _text("dut"),
        _ref("meter_id", "meters"),
        _ref("fixture_id", "fixtures"),
        _ref("reference_set_id", "reference_sets"),
        Column("settings", JSON, nullable=True),
        Column("status", String(16), nullable=False),
        _text("note"),
        Column("points", Integer, nullable=False, default=0),
        Column("started_at", UtcDateTime, nullable=False),
        Column("finished_at", UtcDateTime, nullable=True),
        Column("last_write_at", UtcDateTime, nullable=True),
        Column("writer_host", Text, nullable=True),
        Column("writer_pid", Integer, nullable=True),
        CheckConstraint(
            "status IN ('running', 'complete', 'interrupted')", name="ck_sweeps_status"
        ),
    )
    Table(
        "sweep_points",
        md,
        Column("sweep_id", Integer, ForeignKey("sweeps.id"), primary_key=True),
        Column("idx", Integer, primary_key=True, autoincrement=False),
        Column("frequency", Double, nullable=False),
        *(_real(name) for name in ("raw_r", "raw_x", "corrected_r", "corrected_x")),
        _real("u_r"),
        _real("u_x"),
        Column("flags", Text, nullable=False, default="", server_default=""),
        sqlite_with_rowid=False,
    )
    Table(
        "plans",
        md,
        _id(),
        Column("hash", String(64), nullable=False, unique=True),
        _text("name"),
        Column("text", Text, nullable=False),
        Column("created_at", UtcDateTime, nullable=False),
    )
    Table(
        "lots",
        md,
        _id(),
        Column("key", String(64), nullable=False, unique=True),
        _text("name"),
        _text("notes"),
        Column("created_at", UtcDateTime, nullable=False),
    )
    Table(
        "units",
        md,
        _id(),
        Column("attempt_id", String(36), nullable=False, unique=True),
        _text("serial"),
        Column("serial_key", String(64), nullable=False, index=True),
        Column("attempt", Integer, nullable=False, default=1),
        _text("station"),
        _text("operator"),
        _ref("plan_id", "plans"),
        _ref("reference_set_id", "reference_sets"),
        _ref("meter_id", "meters"),
        _ref("fixture_id", "fixtures"),
        Column("started_at", UtcDateTime, nullable=True),
        Column("finished_at", UtcDateTime, nullable=True),
        _text("outcome"),
        _text("bin"),
        _text("notes"),
        Column("saved_at", UtcDateTime, nullable=False),
        _ref("lot_id", "lots"),
        Column("reference_override", Text, nullable=False, default="", server_default=""),
        _real("temperature"),
        _ref("check_acknowledgement_id", "check_acknowledgements"),
        Column("readings_layout", Text, nullable=True),
        Column("readings", LargeBinary, nullable=True),
        Index("ix_units_lot_serial", "lot_id", "serial_key", "attempt", "id"),
        Index("ix_units_lot_bin", "lot_id", "bin", "outcome"),
        Index("ix_units_lot_order", "lot_id", text(UNIT_TEST_TIME), "id"),
    )
    Table(
        "measurements",
        md,
        Column("unit_id", Integer, ForeignKey("units.id"), primary_key=True),
        Column("seq", Integer, primary_key=True, autoincrement=False),
        _text("parameter"),
        _real("frequency"),
        _real("value"),
        _text("si_unit"),
        _real("low_limit"),
        _real("high_limit"),
        _text("verdict"),
        _ref("lot_id", "lots"),
        Column("value_special", String(4), nullable=False, default=""),
        _real("uncertainty"),
        _real("tolerance_low"),
        _real("tolerance_high"),
        Column("tested_at", UtcDateTime, nullable=True),
        _real("bias_current"),
        Index(
            "ix_measurements_lot_order",
            "lot_id",
            "parameter",
            "frequency",
            "si_unit",
            "value_special",
            "tested_at",
            "unit_id",
            "seq",
            "value",
            "verdict",
            "low_limit",
            "high_limit",
            "tolerance_low",
            "tolerance_high",
        ),
        Index(
            "ix_measurements_failing",
            "lot_id",
            "unit_id",
            sqlite_where=text(FAILING_VERDICT),
            postgresql_where=text(FAILING_VERDICT),
        ),
        sqlite_with_rowid=False,
    )
    bias_tables(md)
    check_tables(md)
    grr_tables(md)
    publish_tables(md)
    line_tables(md)
    return md


#: The tables of the newest schema revision.
TABLES = build_metadata().tables
