import type { DeviceClass, Model, Network, Profile, Task } from '../schema/index.js';

/** Everything one validation needs: a profile and the documents it refers to. */
export interface ValidationInput {
  profile: Profile;
  task: Task;
  deviceClass: DeviceClass;
  model: Model;
  network: Network;
  /** The network read from the model's weights file, when the model takes its network from its weights. */
  shippedNetwork?: Network;
  /** Why the weights file could not give a network (unreadable, other sha256, unsupported op). */
  shippedNetworkProblem?: string;
}

/** Measured-to-estimated ratios for inference on real units (from the fleet's calibration). */
export interface Calibration {
  latencyFactor: number;
  energyFactor: number;
  samples: number;
}

export interface ValidateOptions {
  calibration?: Calibration;
}
