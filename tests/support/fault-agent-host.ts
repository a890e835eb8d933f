/**
 * An agent process for the fault tests: the real agent and simulated driver, as `device-agent/main.ts` builds
 * them, with the simulated hardware made to outlive the process. Real lenses and accelerators keep what they
 * were last set to when the agent dies; here every completed driver step is written to the file named by
 * FAULT_HARDWARE_FILE and read back at start, so a test can see what a killed switch left behind and what
 * the restarted agent made of it.
 *
 *   node --import tsx tests/support/fault-agent-host.ts [the agent's --flags]
 */
import { existsSync, readFileSync } from 'node:fs';
import { createAgent } from '../../device-agent/agent.js';
import { writeFileAtomicSync } from '../../device-agent/atomic-file.js';
import { systemClock } from '../../device-agent/clock.js';
import { resolveAgentSettings } from '../../device-agent/config.js';
import type { ProfileDriver } from '../../device-agent/driver.js';
import { createSimDriver } from '../../device-agent/sim-driver.js';
import type { CameraSettings, MemoryPartition } from '../../src/schema/profile.js';

export interface PersistedHardware {
  camera: CameraSettings | null;
  memory: MemoryPartition | null;
  weightsSha256: string | null;
  /** Driver steps completed by this process so far. */
  steps: number;
  /** Process id of the agent that wrote it last. */
  pid: number;
}

const hardwareFile = process.env.FAULT_HARDWARE_FILE;
if (!hardwareFile) throw new Error('set FAULT_HARDWARE_FILE');
const resolved = resolveAgentSettings({ argv: process.argv.slice(2), env: {}, readFile: (p) => readFileSync(p, 'utf8') });
if (!resolved.ok) throw new Error(JSON.stringify(resolved.issues));
const { publicKeyPath, password: _given, passwordFile: _none, ...settings } = resolved.settings;
const password = resolved.settings.password ?? readFileSync(resolved.settings.passwordFile!, 'utf8').trim();

const hw: PersistedHardware = existsSync(hardwareFile)
  ? { ...(JSON.parse(readFileSync(hardwareFile, 'utf8')) as PersistedHardware), steps: 0, pid: process.pid }
  : { camera: null, memory: null, weightsSha256: null, steps: 0, pid: process.pid };
const save = () => writeFileAtomicSync(hardwareFile, JSON.stringify(hw));
save();

const sim = createSimDriver({ clock: systemClock, timeScale: settings.simTimeScale, seed: settings.simSeed });
const driver: ProfileDriver = {
  name: `${sim.name}, hardware kept in ${hardwareFile}`,
  setMemoryPartition: async (partition, target) => {
    await sim.setMemoryPartition(partition, target);
    hw.memory = { ...partition };
    hw.steps += 1;
    save();
  },
  loadWeights: async (path, sha256, target) => {
    await sim.loadWeights(path, sha256, target);
    hw.weightsSha256 = sha256;
    hw.steps += 1;
    save();
  },
  applyCamera: async (camera, target) => {
    await sim.applyCamera(camera, target);
    hw.camera = { ...camera };
    hw.steps += 1;
    save();
  },
  readTelemetry: () => sim.readTelemetry(),
};

const agent = createAgent({
  config: { ...settings, password, publicKeyPem: readFileSync(publicKeyPath, 'utf8') },
  driver,
  log: (line) => process.stdout.write(`${line}\n`),
});
process.on('SIGTERM', () => void agent.stop().then(() => process.exit(0)));
await agent.start();
process.stdout.write('fault host: agent started\n');
