import { mkdirSync, renameSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { decodeMessage } from '../src/protocol/decode.js';
import { MAX_FRESHNESS_BYTES, MAX_PAYLOAD_BYTES } from '../src/protocol/limits.js';
import { PROTOCOL_VERSION, eventBodySchema, type EventBody, type StateMessage } from '../src/protocol/messages.js';
import { eventLine } from './event-lines.js';
import { taskOf } from '../src/protocol/release.js';
import { classFreshnessTopic } from '../src/protocol/topics.js';
import { systemClock, type AgentClock } from './clock.js';
import type { AgentConfig } from './config.js';
import { startControlServer, type ControlEndpoint, type ControlServer } from './control-server.js';
import type { ProfileDriver } from './driver.js';
import { openEventLog, type EventLog } from './event-log.js';
import { createFreshnessWatch, type FreshnessReport, type FreshnessWatch, type KnownRelease } from './freshness-watch.js';
import { openLink, type Link, type MqttConnect } from './link.js';
import { createOutbox, type Outbox } from './outbox.js';
import { createProfileRunner, type ProfileRunner, type TaskResult } from './profile-runner.js';
import { createReleaseStore, type ReleaseStore } from './release-store.js';
import { sweepTemporaryFiles } from './sweep.js';
import { createWeightsCache } from './weights-cache.js';

export const AGENT_VERSION = '0.1.0';

export interface AgentDeps {
  config: AgentConfig;
  driver: ProfileDriver;
  clock?: AgentClock;
  /** Replaces the event log's appends (a test hands in one that fails like a full disk). */
  eventWrite?: (fd: number, text: string) => void;
  /** Replaces mqtt.connect (e.g. to count connections in a test). */
  mqttConnect?: MqttConnect;
  log?: (line: string) => void;
  /** Called with the state after each change (coalesced), e.g. to tell the robot over its own middleware. */
  onStateChange?: (state: StateMessage) => void;
}

export interface Agent {
  /** Restores the last applied release and task from disk, opens the control endpoint, connects to the broker. */
  start(): Promise<void>;
  stop(): Promise<void>;
  state(): StateMessage;
  setTask(task: string): Promise<TaskResult>;
  /** A task announced by the robot's middleware: like setTask, and an unknown name is also reported as a switch-failed event. */
  robotTask(task: string): Promise<TaskResult>;
  setMotion(moving: boolean): void;
  connected(): boolean;
  controlEndpoint(): ControlEndpoint | null;
  /** Events not yet acknowledged by the server. */
  unackedEvents(): number;
}

/**
 * The robot-side agent. It keeps running with or without the network: task switches, motion and
 * events work offline (events wait on disk until the server acknowledges them), and a restart
 * re-applies the last active task from the release stored on disk.
 */
export function createAgent(deps: AgentDeps): Agent {
  const { config, driver } = deps;
  const clock = deps.clock ?? systemClock;
  const log = deps.log ?? (() => {});
  let events: EventLog | null = null;
  let outbox: Outbox | null = null;
  let runner: ProfileRunner | null = null;
  let releases: ReleaseStore | null = null;
  let link: Link | null = null;
  let control: ControlServer | null = null;
  let freshness: FreshnessWatch | null = null;
  /** The stale and expired flags last reported by a freshness event. */
  let freshnessSaid: { stale: boolean; expired: boolean } | null = null;
  let telemetryTimer: NodeJS.Timeout | null = null;
  let stateScheduled: NodeJS.Immediate | null = null;
  const seenCommands: string[] = [];

  function emit(body: EventBody) {
    // An event the server would reject would block the outbox forever: check it before it is logged.
    const checked = eventBodySchema.safeParse(body);
    if (!checked.success) return log(`agent: dropped an invalid ${body.type} event: ${checked.error.issues[0]!.message}`);
    events!.append(body);
    outbox!.kick();
    const line = eventLine(checked.data);
    if (line) log(`agent: ${line}`);
  }

  /** The newest release this device knows: the applied one, or one received and waiting, whichever is higher. */
  function knownRelease(): KnownRelease {
    const v = runner!.view();
    const applied = v.release ? { version: v.release.version, digest: v.digest } : null;
    if (v.pending && (!applied || v.pending.version > applied.version)) return { version: v.pending.version, digest: null };
    return applied;
  }

  function freshnessReport(): FreshnessReport | null {
    return freshness?.report(knownRelease()) ?? null;
  }

  /** One freshness event each time the stale or expired flag changes. */
  function reportFreshnessChange(f: FreshnessReport | null) {
    if (!f || (freshnessSaid && freshnessSaid.stale === f.stale && freshnessSaid.expired === f.expired)) return;
    freshnessSaid = { stale: f.stale, expired: f.expired };
    if (f.stale) log(`agent: a newer release (${f.latestReleaseId}, sequence ${f.latestVersion}) exists than this device was sent; it is not applied until it arrives`);
    if (f.expired) log(`agent: the server's freshness statement expired at ${f.expiresAt}: no fresh word from the server since`);
    emit({ type: 'freshness', stale: f.stale, expired: f.expired, latestReleaseId: f.latestReleaseId, latestVersion: f.latestVersion, expiresAt: f.expiresAt });
  }

  function buildState(online: boolean, offlineReason?: 'shutdown' | 'connection-lost'): StateMessage {
    const v = runner!.view();
    const task = v.running?.task ?? (v.release && v.activeTask ? taskOf(v.release, v.activeTask) : undefined);
    const storageFault = events!.fault() ?? releases!.fault();
    return {
      v: PROTOCOL_VERSION,
      online,
      agentVersion: AGENT_VERSION,
      ts: new Date(clock.now()).toISOString(),
      releaseId: v.release?.id ?? null,
      releaseVersion: v.release?.version ?? null,
      activeTask: v.running ? v.running.taskName : null,
      profileId: v.running ? (task?.profileId ?? null) : null,
      profileRevision: v.running ? (task?.revision ?? null) : null,
      moving: v.moving,
      pending: v.pending,
      refused: v.refused,
      lastSeq: events!.lastSeq(),
      releaseDigest: v.digest,
      storageFault: storageFault === null ? null : storageFault.slice(0, 500),
      freshness: freshnessReport(),
      ...(!online && offlineReason ? { offlineReason } : {}),
    };
  }

  function publishState() {
    stateScheduled = null;
    reportFreshnessChange(freshnessReport());
    link?.publishState(JSON.stringify(buildState(true)), JSON.stringify(buildState(false, 'connection-lost')));
    deps.onStateChange?.(buildState(link?.connected() ?? false));
  }

  function changed() {
    stateScheduled ??= setImmediate(publishState);
  }

  /** A freshness statement: it may mark the device stale or its word expired; it never applies anything itself. */
  function onFreshness(payload: Buffer) {
    if (payload.length === 0) return;
    if (payload.length > MAX_FRESHNESS_BYTES) return log(`agent: ignored a freshness statement of ${payload.length} bytes (limit ${MAX_FRESHNESS_BYTES})`);
    let raw: unknown;
    try {
      raw = JSON.parse(payload.toString('utf8'));
    } catch (e) {
      return log(`agent: ignored a freshness statement that is not JSON (${(e as Error).message})`);
    }
    const r = freshness!.offer(raw);
    if (r.kind === 'accepted') return changed();
    log(r.kind === 'older' ? `agent: ignored an older freshness statement (${r.detail})` : `agent: refused a freshness statement (${r.detail})`);
  }

  function onMessage(channel: 'release' | 'cmd' | 'ack' | 'freshness', payload: Buffer) {
    if (channel === 'freshness') return onFreshness(payload);
    if (channel === 'ack') {
      const ack = decodeMessage('ack', payload);
      // An ack counts only for this log's epoch: one for another (a replay of an older log) numbers other events.
      if (ack.ok && (ack.value.epoch ?? null) === events!.epoch()) outbox!.onAck(ack.value.upTo);
      return;
    }
    if (channel === 'release') {
      // An empty retained payload withdraws the assignment; the device keeps what it runs.
      if (payload.length === 0) return;
      if (payload.length > MAX_PAYLOAD_BYTES.release) {
        return runner!.refuseUnreadable(`oversized: ${payload.length} bytes exceeds the ${MAX_PAYLOAD_BYTES.release}-byte limit of a release`);
      }
      let raw: unknown;
      try {
        raw = JSON.parse(payload.toString('utf8'));
      } catch (e) {
        return runner!.refuseUnreadable(`malformed-json: ${(e as Error).message}`);
      }
      void runner!.offerRelease(raw).catch((e: unknown) => log(`agent: release handling failed: ${(e as Error).message}`));
      return;
    }
    const cmd = decodeMessage('cmd', payload);
    if (!cmd.ok) return log(`agent: ignored a command (${cmd.reason}: ${cmd.detail})`);
    // QoS 1 may deliver a command twice; run each id once.
    if (seenCommands.includes(cmd.value.id)) return;
    seenCommands.push(cmd.value.id);
    if (seenCommands.length > 200) seenCommands.shift();
    if (cmd.value.command.type === 'set-task') void runner!.setTask(cmd.value.command.task, 'command');
    else changed();
  }

  function sendTelemetry() {
    const v = runner!.view();
    const sample = driver.readTelemetry();
    if (!sample || !v.running) return;
    emit({ type: 'telemetry', task: v.running.taskName, profileId: v.running.task.profileId, profileRevision: v.running.task.revision, releaseId: v.running.releaseId, ...sample });
  }

  return {
    start: async function start() {
      // The hardware is read first: a camera that cannot be reached stops the start with its reason.
      await driver.start?.();
      mkdirSync(config.dataDir, { recursive: true, mode: 0o700 });
      for (const path of sweepTemporaryFiles([config.dataDir, join(config.dataDir, 'weights')])) log(`agent: removed ${path}, left by an interrupted write`);
      events = openEventLog(config.dataDir, clock, { log, onFault: changed, ...(deps.eventWrite ? { write: deps.eventWrite } : {}) });
      const username = config.username ?? config.deviceId;
      outbox = createOutbox({ log: events, ackTimeoutMs: config.ackTimeoutMs, send: (payload) => link?.publishEvents(payload) });
      const cache = createWeightsCache({ dir: join(config.dataDir, 'weights'), maxBytes: config.cacheMaxBytes, serverUrl: config.serverUrl, username, password: config.password, log });
      releases = createReleaseStore({ dir: config.dataDir, rootKeyPem: config.publicKeyPem, log, onFault: changed });
      runner = createProfileRunner({
        driver, clock, cache, releases, deviceId: config.deviceId,
        deviceClassId: config.deviceClassId, emit, changed, log,
      });
      const trusted = releases;
      freshness = createFreshnessWatch({ dir: config.dataDir, deviceClassId: config.deviceClassId, trustedKeys: () => trusted.trustedKeys(), clock, changed, log });
      emit({ type: 'agent-started', agentVersion: AGENT_VERSION });
      // restore() decides what runs before its first await, so a release arriving meanwhile is judged against it.
      const restoring = runner.restore();
      link = openLink({
        deviceId: config.deviceId, brokerUrl: config.brokerUrl, username, password: config.password,
        freshnessTopic: classFreshnessTopic(config.deviceClassId),
        willPayload: JSON.stringify(buildState(false, 'connection-lost')), reconnectMs: config.reconnectMs, keepaliveS: config.keepaliveS, log, onMessage,
        ...(deps.mqttConnect ? { mqttConnect: deps.mqttConnect } : {}),
        onConnected: () => {
          log(`agent: connected to ${config.brokerUrl} as ${username}`);
          publishState();
          outbox!.onConnected();
        },
        onDisconnected: () => outbox!.onDisconnected(),
      });
      const endpoint: ControlEndpoint =
        config.controlPort !== undefined && config.controlSocket === undefined
          ? { kind: 'tcp', host: config.controlHost, port: config.controlPort }
          : { kind: 'unix', socketPath: config.controlSocket ?? join(config.dataDir, 'control.sock') };
      const [, server] = await Promise.all([
        restoring,
        startControlServer(endpoint, {
          setTask: (task) => runner!.setTask(task, 'local'),
          setMotion: (moving) => runner!.setMotion(moving),
          state: () => buildState(link?.connected() ?? false),
        }),
      ]);
      control = server;
      // Lets `ocellus-agent task` find the endpoint, including a port picked by the system. Runtime
      // information, rewritten on every start: replaced by rename, without waiting for the disk.
      const controlPath = join(config.dataDir, 'control.json');
      try {
        writeFileSync(`${controlPath}.tmp`, JSON.stringify(control.endpoint));
        renameSync(`${controlPath}.tmp`, controlPath);
      } catch (e) {
        log(`agent: could not write ${controlPath} (${(e as Error).message}); give the endpoint to 'ocellus-agent' by its option instead`);
      }
      telemetryTimer = setInterval(sendTelemetry, config.telemetryIntervalS * 1000);
      telemetryTimer.unref?.();
    },
    stop: async function stop() {
      if (telemetryTimer) clearInterval(telemetryTimer);
      if (stateScheduled) clearImmediate(stateScheduled);
      runner?.close();
      freshness?.close();
      await runner?.idle();
      await releases?.settle();
      outbox?.close();
      releases?.close();
      await link?.close(runner ? JSON.stringify(buildState(false, 'shutdown')) : undefined);
      await control?.close();
      events?.close();
      await driver.close?.();
    },
    state: () => buildState(link?.connected() ?? false),
    setTask: (task) => runner!.setTask(task, 'local'),
    robotTask: (task) => runner!.setTask(task, 'local', true),
    setMotion: (moving) => runner!.setMotion(moving),
    connected: () => link?.connected() ?? false,
    controlEndpoint: () => control?.endpoint ?? null,
    unackedEvents: () => events?.unackedCount() ?? 0,
  };
}
