import type { ConnectionCause, DeviceConnectionRepository } from '../store/device-connections.js';
import type { DeviceStateRepository } from '../store/device-state.js';

/** A state message as the bridge received it, reduced to what tells a connection change (crosses to the writer thread). */
export interface ConnectionSighting {
  online: boolean;
  /** When the server received it (ISO 8601, server clock). */
  at: string;
  /**
   * What the message says about how the device went: 'shutdown' (the agent's own last word), 'connection-lost'
   * (its last will), 'keepalive-missed' (the broker dropped it for silence), 'retained' (a retained offline
   * state delivered on subscribing: it went while the server was away). Absent for an online state.
   */
  hint?: 'shutdown' | 'connection-lost' | 'keepalive-missed' | 'retained';
  releaseId: string | null;
  task: string | null;
}

/** Remembers for a moment which devices the embedded broker dropped for missed keep-alives, until their last will arrives. */
export interface KeepaliveNotes {
  noteMissed(deviceId: string): void;
  /** True once per noted drop. */
  takeMissed(deviceId: string): boolean;
}

export function createKeepaliveNotes(): KeepaliveNotes {
  const missed = new Set<string>();
  return {
    noteMissed: (deviceId) => void missed.add(deviceId),
    takeMissed: (deviceId) => missed.delete(deviceId),
  };
}

function offlineCause(hint: ConnectionSighting['hint']): ConnectionCause {
  if (hint === 'shutdown') return 'clean-disconnect';
  if (hint === 'keepalive-missed') return 'keepalive-missed';
  if (hint === 'retained') return 'found-offline';
  return 'last-will';
}

/**
 * Turns the state messages of one batch, in the order they arrived, into connection changes: a device
 * seen online for the first time is 'connected', online after offline 'reconnected', offline after online
 * one of the offline causes. Repeats (online → online, a will for a device already offline) change nothing.
 * The offline change notes the release and task the device last reported while online. Call inside the
 * batch's transaction, before the batch's states are stored.
 */
export function recordConnectionChanges(
  sightings: ReadonlyArray<[deviceId: string, seen: ConnectionSighting]>,
  states: Pick<DeviceStateRepository, 'summary'>,
  connections: Pick<DeviceConnectionRepository, 'insert'>,
): number {
  const known = new Map<string, { online: boolean; releaseId: string | null; task: string | null } | null>();
  let recorded = 0;
  for (const [deviceId, seen] of sightings) {
    if (!known.has(deviceId)) {
      // The summary, not the state message: a batch of thousands of states would parse each stored one only to read its flag.
      const s = states.summary(deviceId);
      known.set(deviceId, s && s.hasState ? { online: s.online, releaseId: s.releaseId, task: s.activeTask } : null);
    }
    const before = known.get(deviceId)!;
    if (seen.online) {
      if (before?.online) {
        known.set(deviceId, { online: true, releaseId: seen.releaseId, task: seen.task });
        continue;
      }
      connections.insert({ deviceId, at: seen.at, online: true, cause: before ? 'reconnected' : 'connected', releaseId: seen.releaseId, task: seen.task });
      known.set(deviceId, { online: true, releaseId: seen.releaseId, task: seen.task });
      recorded += 1;
    } else {
      // Offline before it was ever online here, or offline again: nothing changed.
      if (!before?.online) continue;
      connections.insert({ deviceId, at: seen.at, online: false, cause: offlineCause(seen.hint), releaseId: before.releaseId, task: before.task });
      known.set(deviceId, { ...before, online: false });
      recorded += 1;
    }
  }
  return recorded;
}
