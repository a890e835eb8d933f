import type { SqlConnection } from './sql-connection.js';

/**
 * One schema change, spelled for each backend side by side. Versions are applied in order, once each, and
 * recorded in `schema_migrations`. The PostgreSQL spelling keeps the SQLite one's tables, columns and
 * constraints; it differs only where the dialects do: `bigint` for SQLite's 64-bit INTEGER, identity columns
 * for AUTOINCREMENT, `double precision` for REAL, no WITHOUT ROWID. Times stay ISO 8601 text in both, so they
 * read back exactly as written and order as strings.
 */
export interface Migration {
  version: number;
  name: string;
  /** The SQLite spelling. */
  sql: string;
  /** The PostgreSQL spelling of the same change. */
  postgres: string;
}

/**
 * The ordered list of migrations. Append only: never edit or renumber one that has shipped.
 * 001 belongs to the server's store (documents, profiles, releases, devices, tokens, audit).
 * 002 is reserved for the bus bridge (device state and events), 003 for the fleet (rollouts):
 * append yours at the end with the next number; numbers must stay strictly increasing.
 */
export const migrations: Migration[] = [
  {
    version: 1,
    name: 'server store: documents, profiles, releases, devices, tokens, audit',
    sql: `
      CREATE TABLE documents (
        kind TEXT NOT NULL CHECK (kind IN ('device-class', 'network', 'task', 'model')),
        id TEXT NOT NULL,
        version INTEGER NOT NULL CHECK (version > 0),
        body TEXT NOT NULL,
        created_at TEXT NOT NULL,
        created_by TEXT NOT NULL,
        PRIMARY KEY (kind, id, version)
      );

      CREATE TABLE profile_revisions (
        profile_id TEXT NOT NULL,
        revision INTEGER NOT NULL CHECK (revision > 0),
        body TEXT NOT NULL,
        report TEXT NOT NULL,
        status TEXT NOT NULL CHECK (status IN ('pass', 'warn', 'fail')),
        refs TEXT NOT NULL,
        created_at TEXT NOT NULL,
        created_by TEXT NOT NULL,
        PRIMARY KEY (profile_id, revision)
      );

      CREATE TABLE releases (
        id TEXT PRIMARY KEY,
        device_class_id TEXT NOT NULL,
        version INTEGER NOT NULL CHECK (version > 0),
        signed TEXT NOT NULL,
        created_at TEXT NOT NULL,
        created_by TEXT NOT NULL,
        UNIQUE (device_class_id, version)
      );

      CREATE TABLE devices (
        id TEXT PRIMARY KEY,
        device_class_id TEXT NOT NULL,
        tags TEXT NOT NULL,
        password_hash TEXT NOT NULL,
        assigned_release_id TEXT REFERENCES releases(id),
        created_at TEXT NOT NULL,
        created_by TEXT NOT NULL
      );

      CREATE TABLE assignments (
        id INTEGER PRIMARY KEY AUTOINCREMENT,
        device_id TEXT NOT NULL REFERENCES devices(id),
        release_id TEXT NOT NULL REFERENCES releases(id),
        cause TEXT NOT NULL,
        actor TEXT NOT NULL,
        created_at TEXT NOT NULL
      );
      CREATE INDEX assignments_by_device ON assignments (device_id, id);

      CREATE TABLE tokens (
        id INTEGER PRIMARY KEY AUTOINCREMENT,
        hash TEXT NOT NULL UNIQUE,
        role TEXT NOT NULL CHECK (role IN ('viewer', 'engineer', 'operator', 'admin')),
        label TEXT NOT NULL,
        created_at TEXT NOT NULL,
        created_by TEXT NOT NULL,
        revoked_at TEXT
      );

      CREATE TABLE audit (
        id INTEGER PRIMARY KEY AUTOINCREMENT,
        at TEXT NOT NULL,
        actor TEXT NOT NULL,
        action TEXT NOT NULL,
        target TEXT NOT NULL,
        detail TEXT NOT NULL
      );
      CREATE INDEX audit_by_time ON audit (at);
    `,
    postgres: `
      CREATE TABLE documents (
        kind text NOT NULL CHECK (kind IN ('device-class', 'network', 'task', 'model')),
        id text NOT NULL,
        version bigint NOT NULL CHECK (version > 0),
        body text NOT NULL,
        created_at text NOT NULL,
        created_by text NOT NULL,
        PRIMARY KEY (kind, id, version)
      );

      CREATE TABLE profile_revisions (
        profile_id text NOT NULL,
        revision bigint NOT NULL CHECK (revision > 0),
        body text NOT NULL,
        report text NOT NULL,
        status text NOT NULL CHECK (status IN ('pass', 'warn', 'fail')),
        refs text NOT NULL,
        created_at text NOT NULL,
        created_by text NOT NULL,
        PRIMARY KEY (profile_id, revision)
      );

      CREATE TABLE releases (
        id text PRIMARY KEY,
        device_class_id text NOT NULL,
        version bigint NOT NULL CHECK (version > 0),
        signed text NOT NULL,
        created_at text NOT NULL,
        created_by text NOT NULL,
        UNIQUE (device_class_id, version)
      );

      CREATE TABLE devices (
        id text PRIMARY KEY,
        device_class_id text NOT NULL,
        tags text NOT NULL,
        password_hash text NOT NULL,
        assigned_release_id text REFERENCES releases(id),
        created_at text NOT NULL,
        created_by text NOT NULL
      );

      CREATE TABLE assignments (
        id bigint GENERATED BY DEFAULT AS IDENTITY PRIMARY KEY,
        device_id text NOT NULL REFERENCES devices(id),
        release_id text NOT NULL REFERENCES releases(id),
        cause text NOT NULL,
        actor text NOT NULL,
        created_at text NOT NULL
      );
      CREATE INDEX assignments_by_device ON assignments (device_id, id);

      CREATE TABLE tokens (
        id bigint GENERATED BY DEFAULT AS IDENTITY PRIMARY KEY,
        hash text NOT NULL UNIQUE,
        role text NOT NULL CHECK (role IN ('viewer', 'engineer', 'operator', 'admin')),
        label text NOT NULL,
        created_at text NOT NULL,
        created_by text NOT NULL,
        revoked_at text
      );

      CREATE TABLE audit (
        id bigint GENERATED BY DEFAULT AS IDENTITY PRIMARY KEY,
        at text NOT NULL,
        actor text NOT NULL,
        action text NOT NULL,
        target text NOT NULL,
        detail text NOT NULL
      );
      CREATE INDEX audit_by_time ON audit (at);
    `,
  },
  {
    version: 2,
    name: 'bus bridge: device state, device events, event cursor',
    sql: `
      CREATE TABLE device_state (
        device_id TEXT PRIMARY KEY,
        online INTEGER NOT NULL DEFAULT 0 CHECK (online IN (0, 1)),
        last_seen_at TEXT NOT NULL,
        state TEXT,
        release_id TEXT,
        release_version INTEGER,
        active_task TEXT,
        updated_at TEXT NOT NULL
      );

      CREATE TABLE device_events (
        device_id TEXT NOT NULL,
        seq INTEGER NOT NULL CHECK (seq > 0),
        ts TEXT NOT NULL,
        type TEXT NOT NULL,
        event TEXT NOT NULL,
        received_at TEXT NOT NULL,
        PRIMARY KEY (device_id, seq)
      ) WITHOUT ROWID;
      CREATE INDEX device_events_by_type ON device_events (type, device_id, seq);

      CREATE TABLE device_event_cursor (
        device_id TEXT PRIMARY KEY,
        contiguous_seq INTEGER NOT NULL CHECK (contiguous_seq >= 0)
      );
    `,
    postgres: `
      CREATE TABLE device_state (
        device_id text PRIMARY KEY,
        online bigint NOT NULL DEFAULT 0 CHECK (online IN (0, 1)),
        last_seen_at text NOT NULL,
        state text,
        release_id text,
        release_version bigint,
        active_task text,
        updated_at text NOT NULL
      );

      CREATE TABLE device_events (
        device_id text NOT NULL,
        seq bigint NOT NULL CHECK (seq > 0),
        ts text NOT NULL,
        type text NOT NULL,
        event text NOT NULL,
        received_at text NOT NULL,
        PRIMARY KEY (device_id, seq)
      );
      CREATE INDEX device_events_by_type ON device_events (type, device_id, seq);

      CREATE TABLE device_event_cursor (
        device_id text PRIMARY KEY,
        contiguous_seq bigint NOT NULL CHECK (contiguous_seq >= 0)
      );
    `,
  },
  {
    version: 3,
    name: 'fleet: rollouts, rollout devices, drift onsets',
    sql: `
      CREATE TABLE rollouts (
        id TEXT PRIMARY KEY,
        release_id TEXT NOT NULL REFERENCES releases(id),
        device_class_id TEXT NOT NULL,
        status TEXT NOT NULL CHECK (status IN ('running', 'paused', 'completed', 'aborted', 'rolling-back', 'rolled-back')),
        spec TEXT NOT NULL,
        wave_count INTEGER NOT NULL CHECK (wave_count > 0),
        current_wave INTEGER NOT NULL CHECK (current_wave >= 0),
        wave_started_at TEXT,
        pause_reason TEXT,
        rollback_by TEXT,
        created_at TEXT NOT NULL,
        created_by TEXT NOT NULL,
        updated_at TEXT NOT NULL
      );
      CREATE INDEX rollouts_by_status ON rollouts (status);

      CREATE TABLE rollout_devices (
        rollout_id TEXT NOT NULL REFERENCES rollouts(id),
        device_id TEXT NOT NULL REFERENCES devices(id),
        wave INTEGER NOT NULL CHECK (wave >= 0),
        position INTEGER NOT NULL,
        status TEXT NOT NULL CHECK (status IN ('waiting', 'assigned', 'applied', 'passed', 'failed', 'skipped')),
        reason TEXT,
        previous_release_id TEXT,
        assignment_id INTEGER REFERENCES assignments(id),
        assigned_at TEXT,
        events_after_seq INTEGER NOT NULL DEFAULT 0,
        applied_at TEXT,
        rollback_status TEXT CHECK (rollback_status IN ('assigned', 'restored', 'nothing-to-restore')),
        rollback_assignment_id INTEGER REFERENCES assignments(id),
        PRIMARY KEY (rollout_id, device_id)
      ) WITHOUT ROWID;
      CREATE INDEX rollout_devices_by_device ON rollout_devices (device_id, rollout_id);
      CREATE INDEX rollout_devices_by_wave ON rollout_devices (rollout_id, wave, position);

      CREATE TABLE drift_events (
        id INTEGER PRIMARY KEY AUTOINCREMENT,
        device_id TEXT NOT NULL,
        device_class_id TEXT NOT NULL,
        quantity TEXT NOT NULL CHECK (quantity IN ('latency', 'energy')),
        onset_at TEXT NOT NULL,
        cleared_at TEXT,
        device_factor REAL NOT NULL,
        class_factor REAL NOT NULL,
        deviation REAL NOT NULL,
        tolerance REAL NOT NULL
      );
      CREATE INDEX drift_events_by_device ON drift_events (device_id, quantity, id);
    `,
    postgres: `
      CREATE TABLE rollouts (
        id text PRIMARY KEY,
        release_id text NOT NULL REFERENCES releases(id),
        device_class_id text NOT NULL,
        status text NOT NULL CHECK (status IN ('running', 'paused', 'completed', 'aborted', 'rolling-back', 'rolled-back')),
        spec text NOT NULL,
        wave_count bigint NOT NULL CHECK (wave_count > 0),
        current_wave bigint NOT NULL CHECK (current_wave >= 0),
        wave_started_at text,
        pause_reason text,
        rollback_by text,
        created_at text NOT NULL,
        created_by text NOT NULL,
        updated_at text NOT NULL
      );
      CREATE INDEX rollouts_by_status ON rollouts (status);

      CREATE TABLE rollout_devices (
        rollout_id text NOT NULL REFERENCES rollouts(id),
        device_id text NOT NULL REFERENCES devices(id),
        wave bigint NOT NULL CHECK (wave >= 0),
        position bigint NOT NULL,
        status text NOT NULL CHECK (status IN ('waiting', 'assigned', 'applied', 'passed', 'failed', 'skipped')),
        reason text,
        previous_release_id text,
        assignment_id bigint REFERENCES assignments(id),
        assigned_at text,
        events_after_seq bigint NOT NULL DEFAULT 0,
        applied_at text,
        rollback_status text CHECK (rollback_status IN ('assigned', 'restored', 'nothing-to-restore')),
        rollback_assignment_id bigint REFERENCES assignments(id),
        PRIMARY KEY (rollout_id, device_id)
      );
      CREATE INDEX rollout_devices_by_device ON rollout_devices (device_id, rollout_id);
      CREATE INDEX rollout_devices_by_wave ON rollout_devices (rollout_id, wave, position);

      CREATE TABLE drift_events (
        id bigint GENERATED BY DEFAULT AS IDENTITY PRIMARY KEY,
        device_id text NOT NULL,
        device_class_id text NOT NULL,
        quantity text NOT NULL CHECK (quantity IN ('latency', 'energy')),
        onset_at text NOT NULL,
        cleared_at text,
        device_factor double precision NOT NULL,
        class_factor double precision NOT NULL,
        deviation double precision NOT NULL,
        tolerance double precision NOT NULL
      );
      CREATE INDEX drift_events_by_device ON drift_events (device_id, quantity, id);
    `,
  },
  {
    version: 4,
    name: 'bus bridge: device connection changes seen by the server',
    sql: `
      CREATE TABLE device_connections (
        id INTEGER PRIMARY KEY AUTOINCREMENT,
        device_id TEXT NOT NULL,
        at TEXT NOT NULL,
        online INTEGER NOT NULL CHECK (online IN (0, 1)),
        cause TEXT NOT NULL,
        release_id TEXT,
        task TEXT
      );
      CREATE INDEX device_connections_by_device ON device_connections (device_id, at, id);
    `,
    postgres: `
      CREATE TABLE device_connections (
        id bigint GENERATED BY DEFAULT AS IDENTITY PRIMARY KEY,
        device_id text NOT NULL,
        at text NOT NULL,
        online bigint NOT NULL CHECK (online IN (0, 1)),
        cause text NOT NULL,
        release_id text,
        task text
      );
      CREATE INDEX device_connections_by_device ON device_connections (device_id, at, id);
    `,
  },
  {
    version: 5,
    name: 'rollback through re-issued releases',
    // A rollback no longer re-sends the old release (devices refuse a lower sequence): each moved device gets
    // a re-issue of its previous release, a new release with a higher sequence, recorded here.
    sql: `ALTER TABLE rollout_devices ADD COLUMN restore_release_id TEXT;`,
    postgres: `ALTER TABLE rollout_devices ADD COLUMN restore_release_id text;`,
  },
  {
    version: 6,
    name: 'device event-log epochs',
    // An agent whose data folder was wiped numbers its events from 1 again under a new epoch (a random id
    // made with its log). Each epoch of a device gets its own run of stored seqs starting after base_seq,
    // so its events are kept while a replay of an older epoch is still recognised. '' is the epoch of
    // agents that send none.
    sql: `
      CREATE TABLE device_event_epochs (
        device_id TEXT NOT NULL,
        epoch TEXT NOT NULL,
        base_seq INTEGER NOT NULL CHECK (base_seq >= 0),
        started_at TEXT NOT NULL,
        PRIMARY KEY (device_id, epoch)
      );
    `,
    postgres: `
      CREATE TABLE device_event_epochs (
        device_id text NOT NULL,
        epoch text NOT NULL,
        base_seq bigint NOT NULL CHECK (base_seq >= 0),
        started_at text NOT NULL,
        PRIMARY KEY (device_id, epoch)
      );
    `,
  },
  {
    version: 7,
    name: 'replicas: leader leases',
    // One row per kind of work only one replica may do at a time (the fleet's rollout and calibration engines).
    // fence grows by one at every change of holder, so a holder can tell its lease was taken meanwhile.
    sql: `
      CREATE TABLE leader_leases (
        name TEXT PRIMARY KEY,
        holder TEXT NOT NULL,
        expires_at_ms INTEGER NOT NULL,
        fence INTEGER NOT NULL CHECK (fence > 0)
      );
    `,
    postgres: `
      CREATE TABLE leader_leases (
        name text PRIMARY KEY,
        holder text NOT NULL,
        expires_at_ms bigint NOT NULL,
        fence bigint NOT NULL CHECK (fence > 0)
      );
    `,
  },
];

// Any constant: the key of the advisory lock that lets one process at a time migrate a PostgreSQL database.
const MIGRATION_LOCK_KEY = 7_402_116;

/**
 * Applies every migration newer than the database, each in its own transaction, and returns the versions
 * applied. Refuses a database that records a version this code does not know (written by newer code).
 * On PostgreSQL each step holds an advisory lock and re-reads what is applied, so replicas starting
 * together migrate once.
 */
export function applyMigrations(db: SqlConnection, list: readonly Migration[] = migrations): number[] {
  list.forEach((m, i) => {
    if (i > 0 && m.version <= list[i - 1]!.version) {
      throw new Error(`migration ${m.version} (${m.name}) is out of order: versions must strictly increase`);
    }
  });
  const postgres = db.dialect === 'postgres';
  const lock = postgres ? db.prepare(`SELECT pg_advisory_xact_lock(${MIGRATION_LOCK_KEY})`) : null;
  db.transaction(() => {
    lock?.get();
    db.exec(`CREATE TABLE IF NOT EXISTS schema_migrations (
      version ${postgres ? 'bigint' : 'INTEGER'} PRIMARY KEY, name TEXT NOT NULL, applied_at TEXT NOT NULL)`);
  });
  const appliedNow = () => new Set(db.prepare('SELECT version FROM schema_migrations').pluck().all() as number[]);
  const known = new Set(list.map((m) => m.version));
  const unknown = [...appliedNow()].filter((v) => !known.has(v)).sort((a, b) => a - b);
  const newest = list.at(-1)?.version ?? 0;
  if (unknown.some((v) => v > newest)) {
    throw new Error(`the database at ${db.location} has schema version ${unknown.at(-1)}, newer than this program knows (up to ${newest}): run the newer program, or restore a backup`);
  }
  if (unknown.length > 0) throw new Error(`the database at ${db.location} records migration(s) ${unknown.join(', ')} that this program does not have`);
  const record = db.prepare('INSERT INTO schema_migrations (version, name, applied_at) VALUES (?, ?, ?)');
  const done: number[] = [];
  for (const m of list) {
    db.transaction(() => {
      lock?.get();
      if (appliedNow().has(m.version)) return;
      db.exec(postgres ? m.postgres : m.sql);
      record.run(m.version, m.name, new Date().toISOString());
      done.push(m.version);
    });
  }
  return done;
}
