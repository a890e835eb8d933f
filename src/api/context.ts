import type { MetricsRegistry } from '../metrics/registry.js';
import type { ChangeFeed } from './change-feed.js';
import type { ReleasePublisher } from '../protocol/release.js';
import type { BlobStore } from '../store/blobs.js';
import type { Store } from '../store/store.js';
import type { TokenRecord } from '../store/tokens.js';
import type { ErrorReporter } from './errors.js';
import type { Signer } from '../release/signer.js';

export interface Clock {
  now(): Date;
}

export interface ApiLimits {
  /** Largest model weights file accepted, in bytes (larger uploads get 413). */
  maxWeightsBytes: number;
  /** Largest JSON request body, in bytes. */
  maxJsonBytes: number;
}

export const DEFAULT_LIMITS: ApiLimits = {
  maxWeightsBytes: 512 * 1024 * 1024,
  maxJsonBytes: 8 * 1024 * 1024,
};

/** Everything the HTTP API is built from; handed in so tests give it real ones on temporary files. */
export interface AppDeps {
  store: Store;
  blobs: BlobStore;
  signer: Signer;
  clock?: Clock;
  /** Sends assigned releases to devices over the bus; without it assignments are recorded but not sent. */
  publisher?: ReleasePublisher;
  metrics?: MetricsRegistry;
  limits?: Partial<ApiLimits>;
  /** Called with faults of the server (500s); defaults to writing the stack to stderr. */
  onError?: ErrorReporter;
  /** Fleet changes for the console's live updates; hand in the one the bus bridge publishes to. */
  changes?: ChangeFeed;
  /** The built web console served on `/` (default: dist/console, built by `npm install`). */
  consoleDir?: string;
}

export interface ResolvedDeps {
  store: Store;
  blobs: BlobStore;
  signer: Signer;
  clock: Clock;
  publisher: ReleasePublisher | undefined;
  metrics: MetricsRegistry;
  limits: ApiLimits;
  changes: ChangeFeed;
}

/** Who made a request: a bearer token, or a device with its own MQTT credentials (weights downloads only). */
export type Principal =
  | { kind: 'token'; token: TokenRecord; actor: string }
  | { kind: 'device'; deviceId: string; actor: string };

export interface AppEnv {
  Variables: {
    principal: Principal | undefined;
    /** The route pattern that matched, for metrics labels. */
    route: string | undefined;
  };
}
