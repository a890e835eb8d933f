import { z } from 'zod';
import { DEVICE_ID_PATTERN } from '../src/protocol/topics.js';
import { idSchema } from '../src/schema/common.js';
import { formatPath, type InputIssue } from '../src/schema/issues.js';
import { DRIVER_STEPS } from './driver.js';

/** A program and its arguments: an array in the JSON file, or one string split at spaces (flags, environment). No shell runs it. */
const commandSchema = z.preprocess(
  (v) => (typeof v === 'string' ? v.trim().split(/\s+/).filter(Boolean) : v),
  z.array(z.string().min(1)).min(1, 'needs at least the program to run'),
);
/** A ROS 2 topic name: absolute, slash-separated words (ROS 2 topic and service name rules). */
const rosTopic = () => z.string().regex(/^\/[A-Za-z][A-Za-z0-9_]*(\/[A-Za-z][A-Za-z0-9_]*)*$/, 'must be an absolute ROS 2 topic name such as /robot/task');

/** Every setting of the agent. The same names serve the JSON file; flags are --kebab-case, env is OCELLUS_AGENT_SNAKE_CASE. */
export const agentSettingsSchema = z.strictObject({
  deviceId: z.string().regex(DEVICE_ID_PATTERN, 'must be 1-64 characters of A-Z, a-z, 0-9, ".", "_" or "-"'),
  deviceClassId: idSchema,
  brokerUrl: z.string().regex(/^(mqtts?|tcp|ssl):\/\/[^/]+/, 'must be an mqtt:// or mqtts:// URL'),
  /** MQTT user name; the device id unless told otherwise. */
  username: z.string().min(1).optional(),
  /** The MQTT password; better from passwordFile or OCELLUS_AGENT_PASSWORD than a flag, which `ps` shows to every user. */
  password: z.string().min(1).optional(),
  /** A file holding the password (mode 0600 or stricter; the agent refuses a file others can read). */
  passwordFile: z.string().min(1).optional(),
  /** Base URL of the Ocellus server, for weights downloads. */
  serverUrl: z.string().regex(/^https?:\/\/[^/]+/, 'must be an http:// or https:// URL'),
  /** PEM file of the server's Ed25519 public key, which every release must be signed with. */
  publicKeyPath: z.string().min(1),
  dataDir: z.string().min(1),
  /** What moves the camera and accelerator: see device-agent/README.md, "Drivers". */
  driver: z.enum(['sim', 'v4l2', 'libcamera', 'command']).default('sim'),
  controlHost: z.enum(['127.0.0.1', '::1', 'localhost']).default('127.0.0.1'),
  /** A loopback port for the control endpoint instead of its Unix socket (tools and tests); 0 picks a free one (written to <dataDir>/control.json). */
  controlPort: z.number().int().min(0).max(65535).optional(),
  /** The control endpoint's Unix socket (mode 0600); <dataDir>/control.sock unless told otherwise or given controlPort. */
  controlSocket: z.string().min(1).optional(),
  telemetryIntervalS: z.number().positive().default(30),
  ackTimeoutMs: z.number().int().min(100).default(2000),
  cacheMaxBytes: z.number().int().positive().default(2 * 1024 ** 3),
  reconnectMs: z.number().int().min(100).default(1000),
  /** MQTT keep-alive: the broker drops the connection (and publishes the last will) after 1.5 × this without a packet. */
  keepaliveS: z.number().int().min(1).max(65535).default(30),
  /** Simulated driver only. */
  simTimeScale: z.number().min(0).default(1),
  simEfficiency: z.number().positive().default(1),
  simSeed: z.number().int().default(1),
  simFailStep: z.enum(DRIVER_STEPS).optional(),
  simFailTask: z.string().min(1).optional(),
  /** V4L2 driver: the camera's device node, the v4l2-ctl program, the gain control, the read-back tolerance. */
  v4l2Device: z.string().min(1).default('/dev/video0'),
  v4l2Ctl: z.string().min(1).default('v4l2-ctl'),
  v4l2GainControl: z.string().regex(/^(auto|[a-z0-9_]+)$/, 'must be "auto" or a V4L2 control name such as analogue_gain').default('auto'),
  v4l2TolerancePct: z.number().min(0).max(50).default(2),
  /** libcamera-style driver: the controls file the camera process reads, and the file it writes back what it applied. */
  libcameraControlsFile: z.string().min(1).optional(),
  libcameraAppliedFile: z.string().min(1).optional(),
  libcameraTolerancePct: z.number().min(0).max(50).default(2),
  /** Command driver (and the accelerator steps of the v4l2 and libcamera drivers): program and arguments, settings as JSON on stdin. */
  cameraCommand: commandSchema.optional(),
  weightsCommand: commandSchema.optional(),
  memoryCommand: commandSchema.optional(),
  /** Time limit of each driver command and v4l2-ctl run. */
  commandTimeoutMs: z.number().int().min(100).max(600_000).default(10_000),
  /** Where the robot's task comes from besides the local control endpoint (which always stays). */
  taskSource: z.enum(['local', 'ros2']).default('local'),
  /** ROS 2 task source: the rosbridge v2 WebSocket, the topics and their types. */
  rosbridgeUrl: z.string().regex(/^wss?:\/\/[^/]+/, 'must be a ws:// or wss:// URL (rosbridge_server, e.g. ws://127.0.0.1:9090)').default('ws://127.0.0.1:9090'),
  rosTaskTopic: rosTopic().default('/robot/task'),
  rosMotionTopic: rosTopic().optional(),
  rosStatusTopic: rosTopic().default('/ocellus/status'),
  rosReconnectMs: z.number().int().min(50).default(1000),
  rosReconnectMaxMs: z.number().int().min(50).default(30_000),
}).superRefine((s, ctx) => {
  if (s.driver === 'command' && !s.cameraCommand) {
    ctx.addIssue({ code: 'custom', path: ['cameraCommand'], message: 'driver "command" needs cameraCommand (the program that applies camera settings)' });
  }
  if (s.driver === 'libcamera' && !s.libcameraControlsFile) {
    ctx.addIssue({ code: 'custom', path: ['libcameraControlsFile'], message: 'driver "libcamera" needs libcameraControlsFile (where the camera process reads its controls)' });
  }
  if (s.rosReconnectMaxMs < s.rosReconnectMs) {
    ctx.addIssue({ code: 'custom', path: ['rosReconnectMaxMs'], message: `must be at least rosReconnectMs (${s.rosReconnectMs})` });
  }
});

export const agentSettingsChecked = agentSettingsSchema.refine((v) => (v.password === undefined) !== (v.passwordFile === undefined), {
  message: 'give the MQTT password by passwordFile (a 0600 file) or OCELLUS_AGENT_PASSWORD, exactly one of them',
  path: ['password'],
});

export type AgentSettings = z.output<typeof agentSettingsSchema>;
type Key = keyof AgentSettings;

/** What createAgent needs: the settings, with the public key and the password read from their files. */
export type AgentConfig = Omit<AgentSettings, 'publicKeyPath' | 'password' | 'passwordFile'> & { publicKeyPem: string; password: string };

const NUMBER_KEYS = new Set<Key>([
  'controlPort', 'telemetryIntervalS', 'ackTimeoutMs', 'cacheMaxBytes', 'reconnectMs', 'keepaliveS', 'simTimeScale', 'simEfficiency', 'simSeed',
  'v4l2TolerancePct', 'libcameraTolerancePct', 'commandTimeoutMs', 'rosReconnectMs', 'rosReconnectMaxMs',
]);
const KEYS = Object.keys(agentSettingsSchema.shape) as Key[];

export const flagOf = (key: string) => `--${key.replace(/[A-Z]/g, (c) => `-${c.toLowerCase()}`)}`;
export const envOf = (key: string) => `OCELLUS_AGENT_${key.replace(/[A-Z]/g, (c) => `_${c}`).toUpperCase()}`;

export interface ConfigSources {
  /** Flags only (the subcommand already removed). */
  argv: readonly string[];
  env: Readonly<Record<string, string | undefined>>;
  readFile(path: string): string;
}

export type ConfigResult = { ok: true; settings: AgentSettings } | { ok: false; issues: InputIssue[] };

function coerce(key: Key, text: string): unknown {
  if (!NUMBER_KEYS.has(key)) return text;
  const n = Number(text);
  return text.trim() !== '' && Number.isFinite(n) ? n : text;
}

/**
 * Merges the config file (--config or OCELLUS_AGENT_CONFIG), then the environment, then flags (each
 * overriding the one before), and checks the result. Every issue names where the bad value came from.
 */
export function resolveAgentSettings(sources: ConfigSources): ConfigResult {
  const values: Record<string, unknown> = {};
  const origin: Record<string, string> = {};
  const issues: InputIssue[] = [];
  const flags = new Map<string, string>();
  for (let i = 0; i < sources.argv.length; i++) {
    const arg = sources.argv[i]!;
    const eq = arg.indexOf('=');
    const name = eq > 0 ? arg.slice(0, eq) : arg;
    if (!name.startsWith('--')) {
      issues.push({ path: arg, message: 'unexpected argument' });
      continue;
    }
    const value = eq > 0 ? arg.slice(eq + 1) : sources.argv[++i];
    if (value === undefined) issues.push({ path: name, message: 'needs a value' });
    else flags.set(name, value);
  }
  const configPath = flags.get('--config') ?? sources.env.OCELLUS_AGENT_CONFIG;
  flags.delete('--config');
  if (configPath) {
    try {
      const file = JSON.parse(sources.readFile(configPath)) as unknown;
      if (!file || typeof file !== 'object' || Array.isArray(file)) issues.push({ path: configPath, message: 'must hold a JSON object' });
      else for (const [k, v] of Object.entries(file)) Object.assign(values, { [k]: v }), (origin[k] = `${configPath}: ${k}`);
    } catch (e) {
      issues.push({ path: configPath, message: `cannot read the config file: ${(e as Error).message}` });
    }
  }
  for (const key of KEYS) {
    const text = sources.env[envOf(key)];
    if (text !== undefined && text !== '') (values[key] = coerce(key, text)), (origin[key] = envOf(key));
  }
  const known = new Map(KEYS.map((k) => [flagOf(k), k]));
  for (const [flag, text] of flags) {
    const key = known.get(flag);
    if (!key) issues.push({ path: flag, message: `unknown option; known: --config, ${[...known.keys()].join(', ')}` });
    else (values[key] = coerce(key, text)), (origin[key] = flag);
  }
  if (issues.length > 0) return { ok: false, issues };
  const parsed = agentSettingsChecked.safeParse(values);
  if (!parsed.success) {
    return {
      ok: false,
      issues: parsed.error.issues.map((i) => {
        const key = String(i.path[0] ?? '');
        const nested = i.path.length > 1 ? ` (${formatPath(i.path)})` : '';
        const where = origin[key] ? `${origin[key]}${nested}` : `${formatPath(i.path)} (config file, ${envOf(key)} or ${flagOf(key)})`;
        return { path: where, message: i.message };
      }),
    };
  }
  return { ok: true, settings: parsed.data };
}

export interface PasswordFileAccess {
  /** Permission bits of the file (stat's mode). */
  modeOf(path: string): number;
  readFile(path: string): string;
}

/**
 * The MQTT password: from passwordFile, which only its owner may read (like ssh's private keys: a file
 * others can read is refused), or as given (OCELLUS_AGENT_PASSWORD or the config file). Trailing newlines are dropped.
 */
export function resolvePassword(settings: Pick<AgentSettings, 'password' | 'passwordFile'>, files: PasswordFileAccess): { ok: true; password: string } | { ok: false; issue: InputIssue } {
  if (settings.passwordFile === undefined) return { ok: true, password: settings.password! };
  const path = settings.passwordFile;
  let mode: number;
  let text: string;
  try {
    mode = files.modeOf(path);
    text = files.readFile(path);
  } catch (e) {
    return { ok: false, issue: { path, message: `cannot read the password file: ${(e as Error).message}` } };
  }
  if ((mode & 0o077) !== 0) {
    return { ok: false, issue: { path, message: `the password file has mode ${(mode & 0o777).toString(8).padStart(4, '0')}; others can read it: chmod 600 it` } };
  }
  const password = text.replace(/[\r\n]+$/, '');
  if (password.length === 0) return { ok: false, issue: { path, message: 'the password file is empty' } };
  return { ok: true, password };
}
