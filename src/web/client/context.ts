import { createContext } from 'preact';
import { useContext, useEffect, useRef, useState, useCallback } from 'preact/hooks';
import type { ApiClient, WhoAmI } from './api.js';
import type { FleetChange, LiveFeed } from './live.js';

export interface ConsoleSession {
  api: ApiClient;
  who: WhoAmI;
  /** True when the caller's role may use the API route with this key (buttons it may not use are not shown). */
  can(routeKey: string): boolean;
  live: LiveFeed;
}

export const SessionContext = createContext<ConsoleSession | null>(null);

export function useSession(): ConsoleSession {
  const s = useContext(SessionContext);
  if (!s) throw new Error('useSession outside a signed-in console');
  return s;
}

export interface Loaded<T> {
  data: T | undefined;
  error: Error | undefined;
  loading: boolean;
  reload(): void;
}

/** Loads data when the inputs change; a reload keeps the old data on screen until the new arrives. */
export function useLoad<T>(load: () => Promise<T>, inputs: unknown[]): Loaded<T> {
  const [state, setState] = useState<{ data: T | undefined; error: Error | undefined; loading: boolean }>({ data: undefined, error: undefined, loading: true });
  const [tick, setTick] = useState(0);
  const latest = useRef(0);
  useEffect(() => {
    const n = ++latest.current;
    setState((s) => ({ ...s, loading: true }));
    load().then(
      (data) => n === latest.current && setState({ data, error: undefined, loading: false }),
      (error: unknown) => n === latest.current && setState((s) => ({ data: s.data, error: error as Error, loading: false })),
    );
    // eslint-style dependency lists are the caller's inputs plus the reload tick.
  }, [...inputs, tick]);
  const reload = useCallback(() => setTick((t) => t + 1), []);
  return { ...state, reload };
}

/** Least time between two reloads caused by live changes: a fleet reporting every second must not hammer the API. */
const MIN_RELOAD_GAP_MS = 1000;

/** Calls `onChange` for fleet changes that pass `filter`: soon after a change, and at most once a second under a stream of them. */
export function useLiveChanges(onChange: () => void, filter: (change: FleetChange) => boolean = () => true): void {
  const { live } = useSession();
  const cb = useRef(onChange);
  cb.current = onChange;
  const pass = useRef(filter);
  pass.current = filter;
  useEffect(() => {
    let timer: ReturnType<typeof setTimeout> | null = null;
    let lastMs = 0;
    const stop = live.subscribe((change) => {
      if (!pass.current(change)) return;
      // Bursts of changes (a wave of devices reporting) become one reload.
      timer ??= setTimeout(
        () => {
          timer = null;
          lastMs = Date.now();
          cb.current();
        },
        Math.max(150, MIN_RELOAD_GAP_MS - (Date.now() - lastMs)),
      );
    });
    return () => {
      stop();
      if (timer) clearTimeout(timer);
    };
  }, [live]);
}
