"""Schema of the logbook database, as forward migrations.

``MIGRATIONS`` is a list of migrations, each a tuple of SQL statements run one by one
(no statement is ever split out of a longer text, so a ";" inside a statement is
safe). The schema version lives in ``PRAGMA user_version``: the number of migrations
applied. Each migration is applied in one transaction; a database whose version is
newer than this program knows is refused rather than touched. Append new migrations;
never edit one already released.
"""

from __future__ import annotations

Migration = tuple[str, ...]

MIGRATIONS: list[Migration] = [
    # 1: the first schema
    (
        """
        CREATE TABLE models (
            code TEXT PRIMARY KEY,
            description TEXT NOT NULL DEFAULT '',
            displacement_cc REAL NOT NULL,
            rated_pressure_bar REAL NOT NULL,
            max_speed_rpm REAL NOT NULL,
            ref_temp_c REAL NOT NULL,
            ref_pressure_bar REAL NOT NULL,
            oil_grade INTEGER NOT NULL,
            oil_vi REAL NOT NULL,
            test_speed_rpm REAL NOT NULL,
            test_temp_min_c REAL NOT NULL,
            test_temp_max_c REAL NOT NULL,
            reading_interval_hours REAL,
            reading_interval_days INTEGER
        )
        """,
        """
        CREATE TABLE limits (
            model TEXT NOT NULL REFERENCES models(code),
            kind TEXT NOT NULL CHECK (kind IN ('case_drain', 'servo_pressure', 'neutral_drift')),
            value REAL NOT NULL,
            direction TEXT NOT NULL CHECK (direction IN ('above', 'below')),
            PRIMARY KEY (model, kind)
        )
        """,
        """
        CREATE TABLE machines (
            unit TEXT PRIMARY KEY,
            site TEXT NOT NULL,
            description TEXT NOT NULL DEFAULT ''
        )
        """,
        """
        CREATE TABLE pumps (
            serial TEXT PRIMARY KEY,
            model TEXT NOT NULL REFERENCES models(code),
            note TEXT NOT NULL DEFAULT ''
        )
        """,
        """
        CREATE TABLE fitments (
            id INTEGER PRIMARY KEY,
            serial TEXT NOT NULL REFERENCES pumps(serial),
            machine TEXT NOT NULL REFERENCES machines(unit),
            position TEXT NOT NULL,
            fitted_on TEXT NOT NULL,
            removed_on TEXT,
            machine_hours_at_fit REAL NOT NULL,
            pump_hours_at_fit REAL NOT NULL,
            machine_hours_at_removal REAL
        )
        """,
        "CREATE INDEX fitments_serial ON fitments(serial, fitted_on)",
        "CREATE INDEX fitments_machine ON fitments(machine, fitted_on)",
        """
        CREATE TABLE readings (
            id INTEGER PRIMARY KEY,
            serial TEXT NOT NULL REFERENCES pumps(serial),
            taken_on TEXT NOT NULL,
            machine TEXT NOT NULL REFERENCES machines(unit),
            machine_hours REAL NOT NULL,
            case_drain_lpm REAL,
            servo_pressure_bar REAL,
            neutral_drift_bar REAL,
            charge_pressure_bar REAL,
            oil_temp_c REAL,
            test_pressure_bar REAL,
            test_speed_rpm REAL,
            oil_grade INTEGER,
            oil_vi REAL,
            iso4406 TEXT,
            technician TEXT NOT NULL DEFAULT '',
            note TEXT NOT NULL DEFAULT '',
            entered_by TEXT NOT NULL,
            entered_at TEXT NOT NULL,
            superseded_by INTEGER REFERENCES readings(id),
            import_id INTEGER REFERENCES imports(id)
        )
        """,
        "CREATE UNIQUE INDEX readings_natural ON readings(serial, taken_on, machine_hours) WHERE superseded_by IS NULL",
        "CREATE INDEX readings_serial ON readings(serial, taken_on)",
        "CREATE INDEX readings_machine ON readings(machine, taken_on)",
        """
        CREATE TABLE events (
            id INTEGER PRIMARY KEY,
            kind TEXT NOT NULL,
            happened_on TEXT NOT NULL,
            serial TEXT REFERENCES pumps(serial),
            machine TEXT REFERENCES machines(unit),
            hours REAL,
            to_machine TEXT REFERENCES machines(unit),
            to_position TEXT,
            to_hours REAL,
            technician TEXT NOT NULL DEFAULT '',
            note TEXT NOT NULL DEFAULT '',
            entered_by TEXT NOT NULL,
            entered_at TEXT NOT NULL,
            import_id INTEGER REFERENCES imports(id)
        )
        """,
        "CREATE INDEX events_serial ON events(serial, happened_on)",
        "CREATE INDEX events_machine ON events(machine, happened_on)",
        """
        CREATE TABLE imports (
            id INTEGER PRIMARY KEY,
            kind TEXT NOT NULL,
            file_name TEXT NOT NULL,
            file_sha256 TEXT NOT NULL,
            rows_added INTEGER NOT NULL,
            entered_by TEXT NOT NULL,
            entered_at TEXT NOT NULL
        )
        """,
        """
        CREATE TABLE audit (
            id INTEGER PRIMARY KEY,
            at TEXT NOT NULL,
            who TEXT NOT NULL,
            action TEXT NOT NULL,
            table_name TEXT NOT NULL,
            row_key TEXT NOT NULL,
            serial TEXT,
            before_json TEXT,
            after_json TEXT
        )
        """,
        "CREATE INDEX audit_serial ON audit(serial, at)",
    ),
    # 2: corrections and removals. A removed row stays, marked with its reason; the
    # natural-key index then covers only current rows (neither corrected nor removed).
    (
        "ALTER TABLE readings ADD COLUMN removed_reason TEXT",
        "ALTER TABLE events ADD COLUMN removed_reason TEXT",
        "ALTER TABLE audit ADD COLUMN reason TEXT",
        "DROP INDEX readings_natural",
        """
        CREATE UNIQUE INDEX readings_current ON readings(serial, taken_on, machine_hours)
            WHERE superseded_by IS NULL AND removed_reason IS NULL
        """,
        "CREATE INDEX readings_import ON readings(import_id) WHERE import_id IS NOT NULL",
        "CREATE INDEX events_import ON events(import_id) WHERE import_id IS NOT NULL",
        "CREATE INDEX audit_table_key ON audit(table_name, row_key)",
    ),
    # 3: money and settings. Costs per pump model (planned job, in-service failure) and
    # downtime per site or machine, all in the one currency held in settings.
    (
        """
        CREATE TABLE costs (
            scope TEXT NOT NULL CHECK (scope IN ('model', 'site', 'machine')),
            name TEXT NOT NULL,
            planned_cost REAL CHECK (planned_cost IS NULL OR planned_cost >= 0),
            failure_cost REAL CHECK (failure_cost IS NULL OR failure_cost >= 0),
            downtime_cost_per_hour REAL CHECK (downtime_cost_per_hour IS NULL OR downtime_cost_per_hour >= 0),
            planned_downtime_hours REAL CHECK (planned_downtime_hours IS NULL OR planned_downtime_hours >= 0),
            failure_downtime_hours REAL CHECK (failure_downtime_hours IS NULL OR failure_downtime_hours >= 0),
            PRIMARY KEY (scope, name)
        )
        """,
        """
        CREATE TABLE settings (
            key TEXT PRIMARY KEY,
            value TEXT NOT NULL
        )
        """,
    ),
    # 4: what an oil analysis measured and which pump an exchange fitted. The measured
    # kinematic viscosity of the reading's oil at 40 C and 100 C (ASTM D445; the
    # temperatures of ISO 3448 and ASTM D2270), and the serial of the pump fitted by an
    # exchange. All nullable: rows before this version have none.
    (
        "ALTER TABLE readings ADD COLUMN nu40_cst REAL",
        "ALTER TABLE readings ADD COLUMN nu100_cst REAL",
        "ALTER TABLE events ADD COLUMN serial_in TEXT",
    ),
]

SCHEMA_VERSION = len(MIGRATIONS)
