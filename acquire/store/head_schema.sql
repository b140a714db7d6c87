-- The newest layout of a results store on SQLite, as Alembic's migrations leave a new file.
-- Written by `python -m acquire.commands.head_schema --write`; never edit it by hand.
-- Write it again after every new migration (DEVELOPERS.md, "Changing the store's schema").
-- `acquire sweep` runs it into a new SQLite file (acquire/store/new_sqlite.py); :now is the
-- time of making.
-- revision: 0012

CREATE TABLE alembic_version (
	version_num VARCHAR(32) NOT NULL, 
	CONSTRAINT alembic_version_pkc PRIMARY KEY (version_num)
);

CREATE TABLE schema_version (
	version INTEGER NOT NULL, 
	applied_at DATETIME NOT NULL, 
	note TEXT NOT NULL, 
	PRIMARY KEY (version)
);

CREATE TABLE meters (
	id INTEGER NOT NULL, 
	"key" VARCHAR(64) NOT NULL, 
	manufacturer TEXT NOT NULL, 
	model TEXT NOT NULL, 
	serial TEXT NOT NULL, 
	firmware TEXT NOT NULL, 
	dialect TEXT NOT NULL, 
	first_seen DATETIME NOT NULL, 
	PRIMARY KEY (id), 
	UNIQUE ("key")
);

CREATE TABLE fixtures (
	id INTEGER NOT NULL, 
	"key" VARCHAR(64) NOT NULL, 
	name TEXT NOT NULL, 
	notes TEXT NOT NULL, 
	created_at DATETIME NOT NULL, 
	PRIMARY KEY (id), 
	UNIQUE ("key")
);

CREATE TABLE plans (
	id INTEGER NOT NULL, 
	hash VARCHAR(64) NOT NULL, 
	name TEXT NOT NULL, 
	text TEXT NOT NULL, 
	created_at DATETIME NOT NULL, 
	PRIMARY KEY (id), 
	UNIQUE (hash)
);

CREATE TABLE lots (
	id INTEGER NOT NULL, 
	"key" VARCHAR(64) NOT NULL, 
	name TEXT NOT NULL, 
	notes TEXT NOT NULL, 
	created_at DATETIME NOT NULL, 
	PRIMARY KEY (id), 
	UNIQUE ("key")
);

CREATE TABLE reference_sets (
	id INTEGER NOT NULL, 
	name TEXT NOT NULL, 
	fixture_id INTEGER, 
	meter_id INTEGER, 
	fixture TEXT NOT NULL, 
	meter TEXT NOT NULL, 
	captured_at DATETIME, 
	temperature DOUBLE, 
	notes TEXT NOT NULL, 
	method TEXT NOT NULL, 
	standards TEXT NOT NULL, 
	points INTEGER NOT NULL, 
	saved_at DATETIME NOT NULL, repeats INTEGER DEFAULT 1 NOT NULL, grid_spacing TEXT DEFAULT '' NOT NULL, 
	PRIMARY KEY (id), 
	FOREIGN KEY(fixture_id) REFERENCES fixtures (id), 
	FOREIGN KEY(meter_id) REFERENCES meters (id)
);

CREATE TABLE reference_points (
	reference_set_id INTEGER NOT NULL, 
	idx INTEGER NOT NULL, 
	frequency DOUBLE NOT NULL, 
	open_r DOUBLE, 
	open_x DOUBLE, 
	short_r DOUBLE, 
	short_x DOUBLE, 
	load_r DOUBLE, 
	load_x DOUBLE, 
	load_true_r DOUBLE, 
	load_true_x DOUBLE, open_u DOUBLE, short_u DOUBLE, load_u DOUBLE, 
	PRIMARY KEY (reference_set_id, idx), 
	FOREIGN KEY(reference_set_id) REFERENCES reference_sets (id)
)
 WITHOUT ROWID

;

CREATE TABLE sweeps (
	id INTEGER NOT NULL, 
	dut TEXT NOT NULL, 
	meter_id INTEGER, 
	fixture_id INTEGER, 
	reference_set_id INTEGER, 
	settings JSON, 
	status VARCHAR(16) NOT NULL, 
	note TEXT NOT NULL, 
	points INTEGER NOT NULL, 
	started_at DATETIME NOT NULL, 
	finished_at DATETIME, 
	last_write_at DATETIME, 
	writer_host TEXT, 
	writer_pid INTEGER, 
	PRIMARY KEY (id), 
	CONSTRAINT ck_sweeps_status CHECK (status IN ('running', 'complete', 'interrupted')), 
	FOREIGN KEY(meter_id) REFERENCES meters (id), 
	FOREIGN KEY(fixture_id) REFERENCES fixtures (id), 
	FOREIGN KEY(reference_set_id) REFERENCES reference_sets (id)
);

CREATE TABLE units (
	id INTEGER NOT NULL, 
	attempt_id VARCHAR(36) NOT NULL, 
	serial TEXT NOT NULL, 
	serial_key VARCHAR(64) NOT NULL, 
	attempt INTEGER NOT NULL, 
	station TEXT NOT NULL, 
	operator TEXT NOT NULL, 
	plan_id INTEGER, 
	reference_set_id INTEGER, 
	meter_id INTEGER, 
	fixture_id INTEGER, 
	started_at DATETIME, 
	finished_at DATETIME, 
	outcome TEXT NOT NULL, 
	bin TEXT NOT NULL, 
	notes TEXT NOT NULL, 
	saved_at DATETIME NOT NULL, 
	lot_id INTEGER, reference_override TEXT DEFAULT '' NOT NULL, temperature DOUBLE, check_acknowledgement_id INTEGER REFERENCES check_acknowledgements (id), readings_layout TEXT, readings BLOB, 
	PRIMARY KEY (id), 
	UNIQUE (attempt_id), 
	FOREIGN KEY(plan_id) REFERENCES plans (id), 
	FOREIGN KEY(reference_set_id) REFERENCES reference_sets (id), 
	FOREIGN KEY(meter_id) REFERENCES meters (id), 
	FOREIGN KEY(fixture_id) REFERENCES fixtures (id), 
	FOREIGN KEY(lot_id) REFERENCES lots (id)
);

CREATE INDEX ix_units_serial_key ON units (serial_key);

CREATE TABLE sweep_points (
	sweep_id INTEGER NOT NULL, 
	idx INTEGER NOT NULL, 
	frequency DOUBLE NOT NULL, 
	raw_r DOUBLE, 
	raw_x DOUBLE, 
	corrected_r DOUBLE, 
	corrected_x DOUBLE, u_r DOUBLE, u_x DOUBLE, flags TEXT DEFAULT '' NOT NULL, 
	PRIMARY KEY (sweep_id, idx), 
	FOREIGN KEY(sweep_id) REFERENCES sweeps (id)
)
 WITHOUT ROWID

;

CREATE TABLE measurements (
	unit_id INTEGER NOT NULL, 
	seq INTEGER NOT NULL, 
	parameter TEXT NOT NULL, 
	frequency DOUBLE, 
	value DOUBLE, 
	si_unit TEXT NOT NULL, 
	low_limit DOUBLE, 
	high_limit DOUBLE, 
	verdict TEXT NOT NULL, 
	lot_id INTEGER, 
	value_special VARCHAR(4) NOT NULL, uncertainty DOUBLE, tolerance_low DOUBLE, tolerance_high DOUBLE, tested_at DATETIME, bias_current DOUBLE, 
	PRIMARY KEY (unit_id, seq), 
	FOREIGN KEY(unit_id) REFERENCES units (id), 
	FOREIGN KEY(lot_id) REFERENCES lots (id)
)
 WITHOUT ROWID

;

CREATE INDEX ix_measurements_lot_order ON measurements (lot_id, parameter, frequency, si_unit, value_special, tested_at, unit_id, seq, value, verdict, low_limit, high_limit, tolerance_low, tolerance_high);

CREATE TABLE bias_sweeps (
	id INTEGER NOT NULL, 
	dut TEXT NOT NULL, 
	fixture TEXT NOT NULL, 
	meter TEXT NOT NULL, 
	supply TEXT NOT NULL, 
	reference_set_id INTEGER, 
	frequency DOUBLE NOT NULL, 
	currents TEXT NOT NULL, 
	drops TEXT NOT NULL, 
	maximum DOUBLE, 
	step DOUBLE, 
	dwell DOUBLE, 
	energy DOUBLE, 
	confirmed TEXT NOT NULL, 
	points INTEGER NOT NULL, 
	status VARCHAR(16) NOT NULL, 
	note TEXT NOT NULL, 
	started_at DATETIME NOT NULL, 
	finished_at DATETIME, 
	last_write_at DATETIME, 
	writer_host TEXT, 
	writer_pid INTEGER, 
	PRIMARY KEY (id), 
	CONSTRAINT ck_bias_sweeps_status CHECK (status IN ('running', 'complete', 'interrupted', 'failed')), 
	FOREIGN KEY(reference_set_id) REFERENCES reference_sets (id)
);

CREATE TABLE bias_points (
	bias_sweep_id INTEGER NOT NULL, 
	idx INTEGER NOT NULL, 
	setpoint DOUBLE, 
	applied DOUBLE, 
	raw_r DOUBLE, 
	raw_x DOUBLE, 
	corrected_r DOUBLE, 
	corrected_x DOUBLE, 
	ls DOUBLE, 
	rs DOUBLE, 
	q DOUBLE, 
	PRIMARY KEY (bias_sweep_id, idx), 
	FOREIGN KEY(bias_sweep_id) REFERENCES bias_sweeps (id)
)
 WITHOUT ROWID

;

CREATE TABLE bias_drops (
	bias_sweep_id INTEGER NOT NULL, 
	idx INTEGER NOT NULL, 
	drop_fraction DOUBLE NOT NULL, 
	drop_current DOUBLE, 
	highest_current DOUBLE, 
	PRIMARY KEY (bias_sweep_id, idx), 
	FOREIGN KEY(bias_sweep_id) REFERENCES bias_sweeps (id)
)
 WITHOUT ROWID

;

CREATE TABLE rise_runs (
	id INTEGER NOT NULL, 
	dut TEXT NOT NULL, 
	meter TEXT NOT NULL, 
	supply TEXT NOT NULL, 
	current_asked DOUBLE, 
	ambient DOUBLE, 
	time_limit DOUBLE, 
	settle_window DOUBLE, 
	settle_tolerance DOUBLE, 
	target_rise DOUBLE, 
	r_cold DOUBLE, 
	t_cold DOUBLE, 
	held_current DOUBLE, 
	settled BOOLEAN, 
	steps TEXT NOT NULL, 
	readings INTEGER NOT NULL, 
	status VARCHAR(16) NOT NULL, 
	note TEXT NOT NULL, 
	started_at DATETIME NOT NULL, 
	finished_at DATETIME, 
	last_write_at DATETIME, 
	writer_host TEXT, 
	writer_pid INTEGER, 
	PRIMARY KEY (id), 
	CONSTRAINT ck_rise_runs_status CHECK (status IN ('running', 'complete', 'interrupted', 'failed'))
);

CREATE TABLE rise_readings (
	rise_run_id INTEGER NOT NULL, 
	idx INTEGER NOT NULL, 
	elapsed DOUBLE, 
	resistance DOUBLE, 
	rise DOUBLE, 
	PRIMARY KEY (rise_run_id, idx), 
	FOREIGN KEY(rise_run_id) REFERENCES rise_runs (id)
)
 WITHOUT ROWID

;

CREATE TABLE check_standards (
	id INTEGER NOT NULL, 
	"key" VARCHAR(64) NOT NULL, 
	name TEXT NOT NULL, 
	created_at DATETIME NOT NULL, 
	PRIMARY KEY (id), 
	UNIQUE ("key")
);

CREATE TABLE check_results (
	id INTEGER NOT NULL, 
	standard_id INTEGER NOT NULL, 
	check_id VARCHAR(36) NOT NULL, 
	checked_at DATETIME NOT NULL, 
	station TEXT NOT NULL, 
	plan_hash TEXT NOT NULL, 
	quantity TEXT NOT NULL, 
	si_unit TEXT NOT NULL, 
	value DOUBLE, 
	uncertainty DOUBLE, 
	rules TEXT NOT NULL, 
	PRIMARY KEY (id), 
	FOREIGN KEY(standard_id) REFERENCES check_standards (id)
);

CREATE INDEX ix_check_results_standard ON check_results (standard_id, checked_at, id);

CREATE TABLE check_acknowledgements (
	id INTEGER NOT NULL, 
	standard_id INTEGER NOT NULL, 
	made_at DATETIME NOT NULL, 
	made_by TEXT NOT NULL, 
	reason TEXT NOT NULL, 
	acknowledged TEXT NOT NULL, 
	check_id VARCHAR(36), 
	PRIMARY KEY (id), 
	FOREIGN KEY(standard_id) REFERENCES check_standards (id)
);

CREATE TABLE grr_studies (
	id INTEGER NOT NULL, 
	name TEXT NOT NULL, 
	plan_id INTEGER, 
	plan_hash TEXT NOT NULL, 
	quantity TEXT NOT NULL, 
	unit TEXT NOT NULL, 
	parts INTEGER NOT NULL, 
	operators INTEGER NOT NULL, 
	trials INTEGER NOT NULL, 
	operator_names TEXT NOT NULL, 
	tolerance DOUBLE, 
	seed TEXT NOT NULL, 
	station TEXT NOT NULL, 
	meter TEXT NOT NULL, 
	reference_set_id INTEGER, 
	measurements INTEGER NOT NULL, 
	status VARCHAR(16) NOT NULL, 
	note TEXT NOT NULL, 
	started_at DATETIME NOT NULL, 
	finished_at DATETIME, 
	last_write_at DATETIME, 
	writer_host TEXT, 
	writer_pid INTEGER, 
	PRIMARY KEY (id), 
	CONSTRAINT ck_grr_studies_status CHECK (status IN ('running', 'complete', 'interrupted', 'failed')), 
	FOREIGN KEY(plan_id) REFERENCES plans (id), 
	FOREIGN KEY(reference_set_id) REFERENCES reference_sets (id)
);

CREATE TABLE grr_measurements (
	grr_study_id INTEGER NOT NULL, 
	idx INTEGER NOT NULL, 
	part INTEGER NOT NULL, 
	operator TEXT NOT NULL, 
	trial INTEGER NOT NULL, 
	order_index INTEGER NOT NULL, 
	value DOUBLE, 
	uncertainty DOUBLE, 
	measured_at DATETIME NOT NULL, 
	PRIMARY KEY (grr_study_id, idx), 
	FOREIGN KEY(grr_study_id) REFERENCES grr_studies (id)
)
 WITHOUT ROWID

;

CREATE INDEX ix_units_lot_serial ON units (lot_id, serial_key, attempt, id);

CREATE INDEX ix_measurements_failing ON measurements (lot_id, unit_id) WHERE verdict NOT IN ('pass', 'conditional pass', '');

CREATE TABLE publish_positions (
	station TEXT NOT NULL, 
	last_unit_id INTEGER NOT NULL, 
	updated_at DATETIME NOT NULL, 
	PRIMARY KEY (station)
);

CREATE TABLE station_states (
	station_key VARCHAR(64) NOT NULL, 
	station TEXT NOT NULL, 
	state VARCHAR(16) NOT NULL, 
	reason TEXT NOT NULL, 
	lot TEXT NOT NULL, 
	"plan" TEXT NOT NULL, 
	plan_hash TEXT NOT NULL, 
	operator TEXT NOT NULL, 
	meter TEXT NOT NULL, 
	fixture TEXT NOT NULL, 
	tested INTEGER NOT NULL, 
	passed INTEGER NOT NULL, 
	waiting INTEGER NOT NULL, 
	"references" TEXT NOT NULL, 
	check_standard TEXT NOT NULL, 
	started_at DATETIME NOT NULL, 
	updated_at DATETIME NOT NULL, 
	host TEXT NOT NULL, 
	pid INTEGER NOT NULL, 
	PRIMARY KEY (station_key)
);

CREATE INDEX ix_units_lot_bin ON units (lot_id, bin, outcome);

CREATE INDEX ix_units_lot_order ON units (lot_id, coalesce(finished_at, started_at, saved_at), id);

INSERT INTO "alembic_version" ("version_num") VALUES ('0012');

INSERT INTO "schema_version" ("version", "applied_at", "note") VALUES (2, :now, 'created');

INSERT INTO "schema_version" ("version", "applied_at", "note") VALUES (3, :now, 'kept by Alembic from here on');
