import type { z } from 'zod';
import { deviceHistoryQuerySchema, driftQuerySchema, historyQuerySchema, reportQuerySchema, rolloutQuerySchema } from '../fleet/queries.js';
import { rolloutRequestSchema } from '../fleet/rollout/spec.js';
import { releaseRequestSchema } from '../release/request.js';
import { deviceClassSchema } from '../schema/device-class.js';
import { modelSchema } from '../schema/model.js';
import { networkSchema } from '../schema/network.js';
import { profileSchema } from '../schema/profile.js';
import { taskSchema } from '../schema/task.js';
import { deviceEventsQuerySchema } from './routes/device-events-query.js';
import { planRequestSchema } from './routes/plan-request.js';
import type { Access } from './roles.js';
import {
  assignRequestSchema,
  auditQuerySchema,
  deviceQuerySchema,
  diffQuerySchema,
  enrolRequestSchema,
  releaseQuerySchema,
  renderPreviewRequestSchema,
  tokenRequestSchema,
  weightsQuerySchema,
} from './request-schemas.js';

export type Method = 'get' | 'post' | 'put' | 'patch' | 'delete';

/** One route of the API: the single place its access rule is declared; the app, the tests and OpenAPI read it. */
export interface RouteSpec {
  key: string;
  method: Method;
  /** Full path, hono syntax (`:id`). */
  path: string;
  access: Access;
  /** True when the route changes stored state (or would, like edits of immutable releases). */
  mutates: boolean;
  summary: string;
  body?: z.ZodType;
  /** A binary body (streamed), not JSON. */
  binaryBody?: boolean;
  query?: z.ZodObject;
  tag: string;
}

export const API_BASE = '/api/v1';

export type DocumentCollection = 'device-classes' | 'networks' | 'tasks' | 'models';

/** The versioned document collections and the document kind each holds. */
export const DOCUMENT_COLLECTIONS = {
  'device-classes': { kind: 'device-class', schema: deviceClassSchema, noun: 'device class' },
  networks: { kind: 'network', schema: networkSchema, noun: 'network' },
  tasks: { kind: 'task', schema: taskSchema, noun: 'task' },
  models: { kind: 'model', schema: modelSchema, noun: 'model' },
} as const;

function documentRoutes(collection: DocumentCollection): RouteSpec[] {
  const { schema, noun } = DOCUMENT_COLLECTIONS[collection];
  const base = `${API_BASE}/${collection}`;
  const tag = collection;
  return [
    { key: `${collection}.list`, method: 'get', path: base, access: 'viewer', mutates: false, summary: `List ${noun}s (latest versions)`, tag },
    { key: `${collection}.create`, method: 'post', path: base, access: 'engineer', mutates: true, summary: `Create a ${noun}`, body: schema, tag },
    { key: `${collection}.read`, method: 'get', path: `${base}/:id`, access: 'viewer', mutates: false, summary: `Read the latest version of a ${noun}`, tag },
    { key: `${collection}.update`, method: 'put', path: `${base}/:id`, access: 'engineer', mutates: true, summary: `Save a new version of a ${noun}`, body: schema, tag },
    { key: `${collection}.history`, method: 'get', path: `${base}/:id/history`, access: 'viewer', mutates: false, summary: `Every version of a ${noun}, oldest first`, tag },
  ];
}

const P = `${API_BASE}/profiles`;
const R = `${API_BASE}/releases`;
const D = `${API_BASE}/devices`;
const T = `${API_BASE}/tokens`;

export const ROUTES: readonly RouteSpec[] = [
  ...documentRoutes('device-classes'),
  ...documentRoutes('networks'),
  ...documentRoutes('tasks'),
  ...documentRoutes('models'),
  { key: 'models.weights.upload', method: 'put', path: `${API_BASE}/models/:id/weights`, access: 'engineer', mutates: true, binaryBody: true, summary: "Upload a model's weights (streamed; must match the model's sha256)", tag: 'models' },
  { key: 'models.weights.download', method: 'get', path: `${API_BASE}/models/:id/weights`, access: 'viewer-or-device', mutates: false, query: weightsQuerySchema, summary: "Download a model's weights (ETag, If-None-Match, Range); a bearer token or a device's Basic credentials", tag: 'models' },

  { key: 'profiles.list', method: 'get', path: P, access: 'viewer', mutates: false, summary: 'List profiles (latest revisions)', tag: 'profiles' },
  { key: 'profiles.create', method: 'post', path: P, access: 'engineer', mutates: true, body: profileSchema, summary: 'Create a profile: revision 1 with its validation report', tag: 'profiles' },
  { key: 'profiles.read', method: 'get', path: `${P}/:id`, access: 'viewer', mutates: false, summary: 'Read the latest revision of a profile', tag: 'profiles' },
  { key: 'profiles.update', method: 'put', path: `${P}/:id`, access: 'engineer', mutates: true, body: profileSchema, summary: 'Save a new immutable revision of a profile with its validation report', tag: 'profiles' },
  { key: 'profiles.revisions', method: 'get', path: `${P}/:id/revisions`, access: 'viewer', mutates: false, summary: 'Every revision of a profile', tag: 'profiles' },
  { key: 'profiles.revision', method: 'get', path: `${P}/:id/revisions/:revision`, access: 'viewer', mutates: false, summary: 'One revision of a profile', tag: 'profiles' },
  { key: 'profiles.diff', method: 'get', path: `${P}/:id/diff`, access: 'viewer', mutates: false, query: diffQuerySchema, summary: 'Field-level differences between two revisions', tag: 'profiles' },
  { key: 'render-preview', method: 'post', path: `${API_BASE}/render-preview`, access: 'viewer', mutates: false, body: renderPreviewRequestSchema, summary: "What the robot sees: a sample image through a profile's point-spread function and sensor noise at a distance, as a PNG at the network's input size", tag: 'profiles' },
  { key: 'validate', method: 'post', path: `${API_BASE}/validate`, access: 'viewer', mutates: false, body: profileSchema, summary: 'Validate a profile without saving it', tag: 'profiles' },
  { key: 'plan', method: 'post', path: `${API_BASE}/plan`, access: 'engineer', mutates: false, body: planRequestSchema, summary: 'Search settings for a task on a device class: the Pareto front of candidates that pass every check (energy, accuracy, latency), or the binding constraints and near misses; up to about a second of CPU', tag: 'profiles' },

  { key: 'releases.list', method: 'get', path: R, access: 'viewer', mutates: false, query: releaseQuerySchema, summary: 'List releases', tag: 'releases' },
  { key: 'releases.create', method: 'post', path: R, access: 'operator', mutates: true, body: releaseRequestSchema, summary: 'Build, sign and store a release from validated profile revisions', tag: 'releases' },
  { key: 'releases.read', method: 'get', path: `${R}/:id`, access: 'viewer', mutates: false, summary: 'A release in its signed form', tag: 'releases' },
  { key: 'releases.reissue', method: 'post', path: `${R}/:id/reissue`, access: 'operator', mutates: true, summary: 'Go back to a release: a new release with the next sequence number and its content (devices refuse a lower sequence)', tag: 'releases' },
  { key: 'releases.replace', method: 'put', path: `${R}/:id`, access: 'operator', mutates: true, summary: 'Refused: releases are immutable (409)', tag: 'releases' },
  { key: 'releases.patch', method: 'patch', path: `${R}/:id`, access: 'operator', mutates: true, summary: 'Refused: releases are immutable (409)', tag: 'releases' },
  { key: 'releases.delete', method: 'delete', path: `${R}/:id`, access: 'operator', mutates: true, summary: 'Refused: releases are immutable (409)', tag: 'releases' },
  { key: 'signing-key', method: 'get', path: `${API_BASE}/signing-key`, access: 'public', mutates: false, summary: "The server's Ed25519 public key (PEM) and key id; ?format=pem gives the bare PEM file", tag: 'releases' },

  { key: 'devices.enrol', method: 'post', path: D, access: 'operator', mutates: true, body: enrolRequestSchema, summary: 'Enrol a device; its MQTT password is shown once', tag: 'devices' },
  { key: 'devices.list', method: 'get', path: D, access: 'viewer', mutates: false, query: deviceQuerySchema, summary: 'List devices by class, tag and online state', tag: 'devices' },
  { key: 'devices.read', method: 'get', path: `${D}/:id`, access: 'viewer', mutates: false, summary: 'A device, what it should run and what it reports', tag: 'devices' },
  { key: 'devices.rotate-password', method: 'post', path: `${D}/:id/rotate-password`, access: 'operator', mutates: true, summary: "Issue a device a new MQTT password (shown once; the old one stops working, a revoked device is reinstated) and end its live session", tag: 'devices' },
  { key: 'devices.revoke', method: 'post', path: `${D}/:id/revoke`, access: 'operator', mutates: true, summary: "Revoke a device's credentials and end its live bus session at once", tag: 'devices' },
  { key: 'devices.assign', method: 'post', path: `${D}/:id/assign`, access: 'operator', mutates: true, body: assignRequestSchema, summary: 'Assign a release to one device and send it', tag: 'devices' },

  { key: 'tokens.create', method: 'post', path: T, access: 'admin', mutates: true, body: tokenRequestSchema, summary: 'Create an API token; the secret is shown once', tag: 'tokens' },
  { key: 'tokens.list', method: 'get', path: T, access: 'admin', mutates: false, summary: 'List API tokens (never their secrets)', tag: 'tokens' },
  { key: 'tokens.revoke', method: 'post', path: `${T}/:id/revoke`, access: 'admin', mutates: true, summary: 'Revoke an API token', tag: 'tokens' },

  { key: 'rollouts.create', method: 'post', path: `${API_BASE}/rollouts`, access: 'operator', mutates: true, body: rolloutRequestSchema, summary: 'Start a staged rollout of a release: waves, each passing its gate (applied, not refused, latency within tolerance) before the next', tag: 'rollouts' },
  { key: 'rollouts.list', method: 'get', path: `${API_BASE}/rollouts`, access: 'viewer', mutates: false, query: rolloutQuerySchema, summary: 'List rollouts, newest first', tag: 'rollouts' },
  { key: 'rollouts.read', method: 'get', path: `${API_BASE}/rollouts/:id`, access: 'viewer', mutates: false, summary: 'A rollout: its waves, every device with its gate status and reason, why it paused', tag: 'rollouts' },
  { key: 'rollouts.pause', method: 'post', path: `${API_BASE}/rollouts/:id/pause`, access: 'operator', mutates: true, summary: 'Pause a running rollout (no further assignments)', tag: 'rollouts' },
  { key: 'rollouts.resume', method: 'post', path: `${API_BASE}/rollouts/:id/resume`, access: 'operator', mutates: true, summary: 'Resume a paused rollout: failed devices of the current wave pass their gate again', tag: 'rollouts' },
  { key: 'rollouts.abort', method: 'post', path: `${API_BASE}/rollouts/:id/abort`, access: 'operator', mutates: true, summary: 'Stop a rollout for good; devices keep what they have', tag: 'rollouts' },
  { key: 'rollouts.rollback', method: 'post', path: `${API_BASE}/rollouts/:id/rollback`, access: 'operator', mutates: true, summary: "Re-assign every moved device's previous release and track until each runs it", tag: 'rollouts' },
  { key: 'devices.history', method: 'get', path: `${D}/:id/history`, access: 'viewer', mutates: false, query: deviceHistoryQuerySchema, summary: 'Which task profile a device ran when, with the change that caused it, and when it was offline (JSON; CSV with Accept: text/csv or format=csv; an MCAP recording of intervals, switches, telemetry and connection changes with format=mcap)', tag: 'history' },
  { key: 'devices.events', method: 'get', path: `${D}/:id/events`, access: 'viewer', mutates: false, query: deviceEventsQuerySchema, summary: "A device's stored events in a time window (device clock, default the last day), oldest first; type= keeps one kind", tag: 'history' },
  { key: 'devices.usage', method: 'get', path: `${D}/:id/usage`, access: 'viewer', mutates: false, query: historyQuerySchema, summary: 'Seconds, frames and energy per UTC day and task, from telemetry', tag: 'history' },
  { key: 'history.task', method: 'get', path: `${API_BASE}/history/tasks/:id`, access: 'viewer', mutates: false, query: historyQuerySchema, summary: 'Every device\'s intervals running one task', tag: 'history' },
  { key: 'history.release', method: 'get', path: `${API_BASE}/history/releases/:id`, access: 'viewer', mutates: false, query: historyQuerySchema, summary: 'Every device\'s intervals running one release', tag: 'history' },
  { key: 'calibration.list', method: 'get', path: `${API_BASE}/calibration`, access: 'viewer', mutates: false, summary: 'Measured ÷ predicted inference latency and energy of every device class, with sample counts and spread', tag: 'calibration' },
  { key: 'calibration.class', method: 'get', path: `${API_BASE}/calibration/device-classes/:id`, access: 'viewer', mutates: false, summary: 'Calibration of one device class and of each of its devices', tag: 'calibration' },
  { key: 'calibration.device', method: 'get', path: `${API_BASE}/calibration/devices/:id`, access: 'viewer', mutates: false, summary: 'Calibration of one device and its drift episodes', tag: 'calibration' },
  { key: 'calibration.report', method: 'get', path: `${API_BASE}/calibration/profiles/:id/report`, access: 'viewer', mutates: false, query: reportQuerySchema, summary: "A profile revision's validation report with its device class's calibration applied (when there is enough telemetry)", tag: 'calibration' },
  { key: 'drift.list', method: 'get', path: `${API_BASE}/drift`, access: 'viewer', mutates: false, query: driftQuerySchema, summary: 'Drift episodes: devices whose measured ÷ predicted ratio left their class by more than the tolerance', tag: 'calibration' },

  { key: 'audit', method: 'get', path: `${API_BASE}/audit`, access: 'viewer', mutates: false, query: auditQuerySchema, summary: 'Audit log of every change, newest first', tag: 'audit' },
  { key: 'whoami', method: 'get', path: `${API_BASE}/whoami`, access: 'viewer', mutates: false, summary: "The calling token: its id, label, role and the keys of the routes it may call", tag: 'meta' },
  { key: 'events.stream', method: 'get', path: `${API_BASE}/events/stream`, access: 'viewer', mutates: false, summary: 'Server-sent events of fleet changes: device state or events stored by the bus, and changes made through the API', tag: 'meta' },
  { key: 'openapi', method: 'get', path: `${API_BASE}/openapi.json`, access: 'public', mutates: false, summary: 'This document', tag: 'meta' },
  { key: 'metrics', method: 'get', path: '/metrics', access: 'viewer', mutates: false, summary: 'Prometheus metrics (text exposition format)', tag: 'meta' },
];

export function routeSpec(key: string): RouteSpec {
  const spec = ROUTES.find((r) => r.key === key);
  if (!spec) throw new Error(`no route ${key} in the route table`);
  return spec;
}
