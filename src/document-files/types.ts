import type { DeviceClass, DocumentKind, Model, Network, Profile, Task } from '../schema/index.js';

/** A problem with one file of the catalog, located by field path. */
export interface CatalogIssue {
  file: string;
  path: string;
  message: string;
  /** 1-based line and column of the problem in the file's text, when the text itself could not be read as JSON/YAML. */
  line?: number;
  column?: number;
}

interface Located<K extends DocumentKind, T> {
  kind: K;
  file: string;
  value: T;
}

/** One parsed document and the file it came from. */
export type CatalogDocument =
  | Located<'device-class', DeviceClass>
  | Located<'network', Network & { id: string }>
  | Located<'model', Model>
  | Located<'task', Task>
  | Located<'profile', Profile>;

export interface Catalog {
  documents: CatalogDocument[];
  issues: CatalogIssue[];
}

/** A profile with every document it refers to. */
export interface ResolvedProfile {
  file: string;
  profile: Profile;
  task: Task;
  deviceClass: DeviceClass;
  model: Model;
  network: Network & { id: string };
}

export type ResolveResult = { ok: true; value: ResolvedProfile } | { ok: false; issues: CatalogIssue[] };
