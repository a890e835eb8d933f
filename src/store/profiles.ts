import type { SqlConnection } from './sql-connection.js';
import type { Report } from '../schema/report.js';

/** The versions of the documents a revision was validated against. */
export interface RevisionRefs {
  task: { id: string; version: number };
  deviceClass: { id: string; version: number };
  model: { id: string; version: number };
  network: { id: string; version: number };
}

export interface ProfileRevision<P = unknown> {
  profileId: string;
  revision: number;
  createdAt: string;
  createdBy: string;
  status: Report['status'];
  profile: P;
  report: Report;
  refs: RevisionRefs;
}

interface Row {
  profile_id: string;
  revision: number;
  body: string;
  report: string;
  status: Report['status'];
  refs: string;
  created_at: string;
  created_by: string;
}

function toRevision<P>(row: Row): ProfileRevision<P> {
  return {
    profileId: row.profile_id,
    revision: row.revision,
    createdAt: row.created_at,
    createdBy: row.created_by,
    status: row.status,
    profile: JSON.parse(row.body) as P,
    report: JSON.parse(row.report) as Report,
    refs: JSON.parse(row.refs) as RevisionRefs,
  };
}

export interface NewRevision<P> {
  profileId: string;
  profile: P;
  report: Report;
  refs: RevisionRefs;
  actor: string;
  at: string;
}

export interface ProfileRepository {
  /** Saves revision 1; null when the profile already exists. */
  create<P>(input: NewRevision<P>): ProfileRevision<P> | null;
  /** Saves the next revision; null when there is no such profile. Revisions never change once saved. */
  addRevision<P>(input: NewRevision<P>): ProfileRevision<P> | null;
  latest<P>(profileId: string): ProfileRevision<P> | null;
  revision<P>(profileId: string, revision: number): ProfileRevision<P> | null;
  revisions<P>(profileId: string): ProfileRevision<P>[];
  /** The latest revision of every profile. */
  list<P>(): ProfileRevision<P>[];
}

export function createProfileRepository(db: SqlConnection): ProfileRepository {
  const insert = db.prepare(`INSERT INTO profile_revisions
    (profile_id, revision, body, report, status, refs, created_at, created_by) VALUES (?, ?, ?, ?, ?, ?, ?, ?)`);
  const latestRow = db.prepare('SELECT * FROM profile_revisions WHERE profile_id = ? ORDER BY revision DESC LIMIT 1');
  const oneRow = db.prepare('SELECT * FROM profile_revisions WHERE profile_id = ? AND revision = ?');
  const allRows = db.prepare('SELECT * FROM profile_revisions WHERE profile_id = ? ORDER BY revision');
  const listRows = db.prepare(`
    SELECT p.* FROM profile_revisions p
    JOIN (SELECT profile_id, MAX(revision) AS revision FROM profile_revisions GROUP BY profile_id) m
      ON p.profile_id = m.profile_id AND p.revision = m.revision
    ORDER BY p.profile_id`);

  function latest<P>(profileId: string): ProfileRevision<P> | null {
    const row = latestRow.get(profileId) as Row | undefined;
    return row ? toRevision<P>(row) : null;
  }

  function save<P>(input: NewRevision<P>, revision: number): ProfileRevision<P> | null {
    insert.run(
      input.profileId,
      revision,
      JSON.stringify(input.profile),
      JSON.stringify(input.report),
      input.report.status,
      JSON.stringify(input.refs),
      input.at,
      input.actor,
    );
    return latest<P>(input.profileId);
  }

  return {
    create: function create(input) {
      return latest(input.profileId) ? null : save(input, 1);
    },
    addRevision: function addRevision(input) {
      const current = latest(input.profileId);
      return current ? save(input, current.revision + 1) : null;
    },
    latest,
    revision: function revision(profileId, n) {
      const row = oneRow.get(profileId, n) as Row | undefined;
      return row ? toRevision(row) : null;
    },
    revisions: function revisions(profileId) {
      return (allRows.all(profileId) as Row[]).map((r) => toRevision(r));
    },
    list: function list() {
      return (listRows.all() as Row[]).map((r) => toRevision(r));
    },
  };
}
