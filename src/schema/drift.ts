export type DriftQuantity = 'latency' | 'energy';

/** One drift episode of a device: from its onset until it came back within tolerance (clearedAt null: still drifting). */
export interface DriftEpisode {
  id: number;
  deviceId: string;
  deviceClassId: string;
  quantity: DriftQuantity;
  onsetAt: string;
  clearedAt: string | null;
  /** The device's fitted measured ÷ predicted ratio at onset. */
  deviceFactor: number;
  /** The same ratio fitted over the rest of its class at onset. */
  classFactor: number;
  /** deviceFactor ÷ classFactor − 1 at onset. */
  deviation: number;
  tolerance: number;
}
