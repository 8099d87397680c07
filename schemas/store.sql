-- rimwatch store, schema version 2: the durable log of one rimwatchd (or one `rimwatch replay
-- --db`). SQLite 3.37 or later (STRICT tables). This file is the one source of the schema: the
-- build compiles it into the store library, which runs it on a new file and then writes the
-- version row; an older file is upgraded step by step by the store's migrations. Read it with any
-- SQLite client (`sqlite3 FILE`, Python's sqlite3); the writer keeps the WAL journal mode.
--
-- Conventions: period_key is the integer sort key of a period (daemon/period.h: the integer
-- itself, days since 1970-01-01, or microseconds since 1970-01-01T00:00:00Z), period_text its
-- canonical label. *_at columns are ISO 8601 UTC wall-clock text written by the daemon; the
-- engine never sees them. row is a model row number (1-based estimation row of that model).
-- Tables are STRICT, so a value of the wrong type is refused rather than converted.

-- One row: the version of this schema the file holds (the store refuses a higher one).
CREATE TABLE schema_version (
  singleton INTEGER PRIMARY KEY CHECK (singleton = 1),
  version INTEGER NOT NULL
) STRICT;

-- Every input series by name. period_kind ('integer' | 'date' | 'timestamp') is fixed by its
-- first observation; a period of another kind for the series is refused.
CREATE TABLE series (
  id INTEGER PRIMARY KEY,
  name TEXT NOT NULL UNIQUE,
  period_kind TEXT NOT NULL CHECK (period_kind IN ('integer', 'date', 'timestamp'))
) STRICT;

-- Every vintage of every (series, period) value: vintage 1 is the first release, each revision
-- adds vintage + 1; nothing is overwritten. The latest vintage is the value models see.
-- value is declared ANY with a type check so SQLite stores the 8-byte double as given: a REAL
-- column writes integral values (and -0.0) as integers and loses the sign of zero.
-- released_at: the sender's release time, if it sent one; received_at: when the daemon took it.
-- The primary key orders rows by (series, period, vintage): a series' history and the latest
-- vintage of a period are index range reads.
CREATE TABLE observations (
  series_id INTEGER NOT NULL REFERENCES series (id),
  period_key INTEGER NOT NULL,
  period_text TEXT NOT NULL,
  vintage INTEGER NOT NULL CHECK (vintage >= 1),
  value ANY NOT NULL CHECK (typeof(value) = 'real'),
  released_at TEXT,
  received_at TEXT NOT NULL,
  PRIMARY KEY (series_id, period_key, vintage)
) STRICT, WITHOUT ROWID;

-- Models as added (the TOML spec text as given) and dropped. A dropped model keeps its row and
-- its records; its name may be added again, as a new model id. At most one active model per name.
-- recorded_inputs (version 2): how many of the model's input rows (complete periods, in period
-- order) have their tests, snapshots and alerts written; rimwatchd acknowledges observations
-- before the model has run them, and on restart records the rows after this count. NULL: every
-- row is recorded (a version 1 file, or a `rimwatch replay --db` log).
CREATE TABLE models (
  id INTEGER PRIMARY KEY,
  name TEXT NOT NULL,
  spec_text TEXT NOT NULL,
  added_at TEXT NOT NULL,
  dropped_at TEXT,
  recorded_inputs INTEGER CHECK (recorded_inputs >= 0)
) STRICT;
CREATE UNIQUE INDEX models_active_name ON models (name) WHERE dropped_at IS NULL;

-- Per-row statistics of a model at the tests cadence (daemon/record.h): spectral radius and its
-- SE as columns for charts, the rest (restriction tests, monitor statistics and levels) as the
-- JSON payload of RowPayload. With a record on every row, payload.monitors holds only the
-- readings that changed since the previous row, and every full_readings_every-th row (100 by
-- default) holds them all: a monitor missing from a row reads as on the latest earlier row.
CREATE TABLE tests (
  model_id INTEGER NOT NULL REFERENCES models (id),
  row INTEGER NOT NULL,
  period TEXT NOT NULL,
  rho REAL,
  rho_se REAL,
  payload TEXT NOT NULL,
  PRIMARY KEY (model_id, row)
) STRICT, WITHOUT ROWID;

-- The model's estimate at the snapshot cadence: coefficients, their SEs, sigma, companion
-- eigenvalues, rho and its SE, as the JSON payload of SnapshotPayload (numbers round-trip
-- exactly).
CREATE TABLE snapshots (
  model_id INTEGER NOT NULL REFERENCES models (id),
  row INTEGER NOT NULL,
  period TEXT NOT NULL,
  payload TEXT NOT NULL,
  PRIMARY KEY (model_id, row)
) STRICT, WITHOUT ROWID;

-- Every alert transition of a model, in the order recorded (id): the monitor, raised or
-- cleared, the level, the statistic, the threshold crossed (raised) or the clear level
-- (cleared), the plain-words message. Alerts are never pruned.
CREATE TABLE alerts (
  id INTEGER PRIMARY KEY,
  model_id INTEGER NOT NULL REFERENCES models (id),
  row INTEGER NOT NULL,
  period TEXT NOT NULL,
  monitor TEXT NOT NULL,
  transition TEXT NOT NULL CHECK (transition IN ('raised', 'cleared')),
  level TEXT NOT NULL CHECK (level IN ('warn', 'critical')),
  statistic REAL,
  threshold REAL,
  message TEXT NOT NULL,
  recorded_at TEXT NOT NULL
) STRICT;
CREATE INDEX alerts_model_row ON alerts (model_id, row);
