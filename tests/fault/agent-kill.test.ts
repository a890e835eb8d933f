/**
 * Fault: an agent process is killed (SIGKILL) in the middle of a task switch, after the new weights are
 * loaded and while the lens is still moving. The simulated hardware keeps what it was last set to, as a
 * real camera and accelerator would. After a restart, the agent must run one whole profile: its reported
 * state and every setting the driver holds (memory partition, weights, camera) match the same profile of
 * the release exactly. (Demo data: greenhouse scout A.)
 */
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { callControl } from '../../device-agent/control-client.js';
import type { ControlEndpoint } from '../../device-agent/control-server.js';
import type { ReleaseTask, SignedRelease } from '../../src/protocol/release.js';
import type { StateMessage } from '../../src/protocol/messages.js';
import { waitFor } from '../support/agent-fixtures.js';
import type { PersistedHardware } from '../support/fault-agent-host.js';
import { startAgentHost, startFaultSite, type FaultSite } from '../support/fault-rig.js';

const ROBOT = 'gh-akill-01';
let site: FaultSite | null = null;

afterAll(async () => {
  await site?.close();
});

function hardware(file: string): PersistedHardware | null {
  return existsSync(file) ? (JSON.parse(readFileSync(file, 'utf8')) as PersistedHardware) : null;
}

/** Whether the driver holds exactly this task's profile. */
function holds(hw: PersistedHardware, task: ReleaseTask): boolean {
  return (
    JSON.stringify(hw.camera) === JSON.stringify(task.camera) &&
    JSON.stringify(hw.memory) === JSON.stringify(task.memory) &&
    hw.weightsSha256 === task.model.sha256
  );
}

async function agentState(s: FaultSite): Promise<StateMessage | null> {
  const file = join(s.agentDir(ROBOT), 'control.json');
  if (!existsSync(file)) return null;
  try {
    const res = await callControl(JSON.parse(readFileSync(file, 'utf8')) as ControlEndpoint, 'GET', '/state');
    return res.status === 200 ? (res.body as StateMessage) : null;
  } catch {
    return null; // the previous process's endpoint, or not listening yet
  }
}

describe('agent killed (SIGKILL) in the middle of a switch', () => {
  it('restarts on one whole profile: reported state and driver settings match it exactly', async () => {
    site = await startFaultSite('agent');
    const s = site;
    const args = await s.enrolRobot(ROBOT);
    const hwFile = join(s.dir, 'hardware.json');
    // Actuation 50x slower than the simulated lens: the camera step of the switch below takes about 3 s.
    const first = startAgentHost([...args, '--sim-time-scale', '50'], hwFile);
    s.agents.push(first);
    await first.waitForOutput(/fault host: agent started/, 'the agent to start');
    await s.api.json('POST', `/api/v1/devices/${ROBOT}/assign`, { releaseId: s.releaseA });
    const { release } = await s.api.json<SignedRelease>('GET', `/api/v1/releases/${s.releaseA}`);
    const rows = release.tasks['row-navigation']!;
    const leaves = release.tasks['leaf-inspection']!;
    await waitFor(async () => (await agentState(s))?.profileId === rows.profileId, 'the agent to run row navigation', 60_000, 100);
    expect(holds(hardware(hwFile)!, rows)).toBe(true);

    // Ask for leaf inspection and kill the agent once the weights are in but the lens has not arrived.
    const switching = callControl(JSON.parse(readFileSync(join(s.agentDir(ROBOT), 'control.json'), 'utf8')) as ControlEndpoint, 'POST', '/task', { task: 'leaf-inspection' }).catch(() => null);
    await waitFor(() => hardware(hwFile)?.weightsSha256 === leaves.model.sha256, 'the new weights to be loaded', 30_000, 5);
    await first.kill();
    await switching;
    const leftBehind = hardware(hwFile)!;
    // The precondition of this test: the kill left half a switch in the hardware.
    expect(holds(leftBehind, rows)).toBe(false);
    expect(holds(leftBehind, leaves)).toBe(false);

    const second = startAgentHost([...args, '--sim-time-scale', '0'], hwFile);
    s.agents.push(second);
    await second.waitForOutput(/fault host: agent started/, 'the agent to start again');
    const state = await waitFor(async () => {
      const st = await agentState(s);
      const hw = hardware(hwFile);
      return st?.activeTask && hw !== null && hw.pid === second.child.pid && hw.steps >= 3 ? st : null;
    }, 'the restarted agent to run a task', 60_000, 50);
    const task = release.tasks[state.activeTask!]!;
    // The switch never completed, so the agent comes back on the last task it completed a switch to.
    expect(state.activeTask).toBe('row-navigation');
    expect({ releaseId: state.releaseId, profileId: state.profileId, profileRevision: state.profileRevision }).toEqual({ releaseId: release.id, profileId: task.profileId, profileRevision: task.revision });
    const hw = hardware(hwFile)!;
    expect({ camera: hw.camera, memory: hw.memory, weightsSha256: hw.weightsSha256 }).toEqual({ camera: task.camera, memory: task.memory, weightsSha256: task.model.sha256 });
    // The server hears the same from the device.
    await waitFor(async () => {
      const d = await s.api.json<{ reportedState: StateMessage | null }>('GET', `/api/v1/devices/${ROBOT}`);
      return d.reportedState?.activeTask === 'row-navigation' && d.reportedState.profileId === task.profileId && d.reportedState.online;
    }, 'the server to record the restored profile', 30_000, 100);
  });
});
