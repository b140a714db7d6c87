"""The tables of runs beside sweeps and units: bias sweeps and temperature-rise runs (revision
0005) and gauge R&R studies (0007), added to the store's metadata by
:func:`acquire.store.schema.build_metadata`."""

from __future__ import annotations

from sqlalchemy import (
    Boolean,
    CheckConstraint,
    Column,
    Double,
    ForeignKey,
    Integer,
    MetaData,
    Table,
    Text,
)

from acquire.store.columns import (
    RUN_STATES,
    UtcDateTime,
    _id,
    _real,
    _ref,
    _text,
    _writer_columns,
)


def grr_tables(md: MetaData) -> None:
    """Gauge R&R studies and their measurements."""
    states = ", ".join(f"'{s}'" for s in RUN_STATES)
    Table(
        "grr_studies",
        md,
        _id(),
        _text("name"),
        _ref("plan_id", "plans"),
        _text("plan_hash"),
        _text("quantity"),
        _text("unit"),
        Column("parts", Integer, nullable=False),
        Column("operators", Integer, nullable=False),
        Column("trials", Integer, nullable=False),
        Column("operator_names", Text, nullable=False),
        _real("tolerance"),
        Column("seed", Text, nullable=False),
        _text("station"),
        _text("meter"),
        _ref("reference_set_id", "reference_sets"),
        Column("measurements", Integer, nullable=False, default=0),
        *_writer_columns(),
        CheckConstraint(f"status IN ({states})", name="ck_grr_studies_status"),
    )
    Table(
        "grr_measurements",
        md,
        Column("grr_study_id", Integer, ForeignKey("grr_studies.id"), primary_key=True),
        Column("idx", Integer, primary_key=True, autoincrement=False),
        Column("part", Integer, nullable=False),
        Column("operator", Text, nullable=False),
        Column("trial", Integer, nullable=False),
        Column("order_index", Integer, nullable=False),
        _real("value"),
        _real("uncertainty"),
        Column("measured_at", UtcDateTime, nullable=False),
        sqlite_with_rowid=False,
    )


def bias_tables(md: MetaData) -> None:
    """Bias sweeps with their points and drop currents; temperature-rise runs with readings."""
    states = ", ".join(f"'{s}'" for s in RUN_STATES)
    Table(
        "bias_sweeps",
        md,
        _id(),
        _text("dut"),
        _text("fixture"),
        _text("meter"),
        _text("supply"),
        _ref("reference_set_id", "reference_sets"),
        Column("frequency", Double, nullable=False),
        Column("currents", Text, nullable=False),
        Column("drops", Text, nullable=False),
        *(_real(name) for name in ("maximum", "step", "dwell", "energy")),
        _text("confirmed"),
        Column("points", Integer, nullable=False, default=0),
        *_writer_columns(),
        CheckConstraint(f"status IN ({states})", name="ck_bias_sweeps_status"),
    )
    Table(
        "bias_points",
        md,
        Column("bias_sweep_id", Integer, ForeignKey("bias_sweeps.id"), primary_key=True),
        Column("idx", Integer, primary_key=True, autoincrement=False),
        *(_real(name) for name in ("setpoint", "applied", "raw_r", "raw_x")),
        *(_real(name) for name in ("corrected_r", "corrected_x", "ls", "rs", "q")),
        sqlite_with_rowid=False,
    )
    Table(
        "bias_drops",
        md,
        Column("bias_sweep_id", Integer, ForeignKey("bias_sweeps.id"), primary_key=True),
        Column("idx", Integer, primary_key=True, autoincrement=False),
        Column("drop_fraction", Double, nullable=False),
        _real("drop_current"),
        _real("highest_current"),
        sqlite_with_rowid=False,
    )
    Table(
        "rise_runs",
        md,
        _id(),
        _text("dut"),
        _text("meter"),
        _text("supply"),
        *(_real(name) for name in ("current_asked", "ambient", "time_limit")),
        *(_real(name) for name in ("settle_window", "settle_tolerance", "target_rise")),
        *(_real(name) for name in ("r_cold", "t_cold", "held_current")),
        Column("settled", Boolean, nullable=True),
        Column("steps", Text, nullable=False, default="[]"),
        Column("readings", Integer, nullable=False, default=0),
        *_writer_columns(),
        CheckConstraint(f"status IN ({states})", name="ck_rise_runs_status"),
    )
    Table(
        "rise_readings",
        md,
        Column("rise_run_id", Integer, ForeignKey("rise_runs.id"), primary_key=True),
        Column("idx", Integer, primary_key=True, autoincrement=False),
        *(_real(name) for name in ("elapsed", "resistance", "rise")),
        sqlite_with_rowid=False,
    )
