/**
 * Builds the driver the settings name. Each kind is imported only when chosen, so an agent carries in
 * memory the code of its own driver and not of the others.
 */
import type { AgentClock } from '../clock.js';
import type { AgentSettings } from '../config.js';
import type { ProfileDriver } from '../driver.js';
import type { AcceleratorPart } from './parts.js';

export async function selectDriver(s: AgentSettings, clock: AgentClock, log: (line: string) => void): Promise<ProfileDriver> {
  if (s.driver === 'sim') {
    const { createSimDriver } = await import('../sim-driver.js');
    return createSimDriver({
      clock, timeScale: s.simTimeScale, efficiency: s.simEfficiency, seed: s.simSeed,
      ...(s.simFailStep ? { failStep: s.simFailStep } : {}),
      ...(s.simFailTask ? { failTask: s.simFailTask } : {}),
    });
  }
  const [{ createToolRunner }, { composeDriver, acceleratorLeftToRobot }, { createCommandAccelerator, createCommandCamera }] = await Promise.all([
    import('./run-tool.js'), import('./parts.js'), import('./command-driver.js'),
  ]);
  const tools = createToolRunner();
  const commandOptions = { tools, deviceId: s.deviceId, timeoutMs: s.commandTimeoutMs };
  const accelerator: AcceleratorPart = s.weightsCommand || s.memoryCommand
    ? createCommandAccelerator(commandOptions, { ...(s.weightsCommand ? { weights: s.weightsCommand } : {}), ...(s.memoryCommand ? { memory: s.memoryCommand } : {}) })
    : acceleratorLeftToRobot(log);
  if (s.driver === 'v4l2') {
    const { createV4l2Camera } = await import('./v4l2-camera.js');
    const camera = createV4l2Camera({ tools, device: s.v4l2Device, program: s.v4l2Ctl, gainControl: s.v4l2GainControl, tolerancePct: s.v4l2TolerancePct, timeoutMs: s.commandTimeoutMs });
    return composeDriver(camera, accelerator, tools);
  }
  if (s.driver === 'libcamera') {
    const { createLibcameraCamera } = await import('./libcamera-camera.js');
    const camera = createLibcameraCamera({
      controlsFile: s.libcameraControlsFile!, tolerancePct: s.libcameraTolerancePct, timeoutMs: s.commandTimeoutMs,
      ...(s.libcameraAppliedFile ? { appliedFile: s.libcameraAppliedFile } : {}),
    });
    return composeDriver(camera, accelerator, tools);
  }
  return composeDriver(createCommandCamera(commandOptions, s.cameraCommand!), accelerator, tools);
}
