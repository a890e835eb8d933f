import type { ApiClient } from './api.js';

/** A fleet change as the server's event stream sends it (src/api/change-feed.ts). */
export type FleetChange =
  | { kind: 'devices'; deviceIds: string[] }
  | { kind: 'api'; method: string; route: string; path: string };

export type LiveStatus = 'connecting' | 'live' | 'reconnecting';

export interface LiveFeed {
  subscribe(listener: (change: FleetChange) => void): () => void;
  onStatus(listener: (status: LiveStatus) => void): () => void;
  status(): LiveStatus;
  close(): void;
}

/** Splits a server-sent-event text stream into {event, data} messages (WHATWG HTML, "server-sent events"). */
export function parseSseChunk(buffer: string): { messages: Array<{ event: string; data: string }>; rest: string } {
  const messages: Array<{ event: string; data: string }> = [];
  const blocks = buffer.replace(/\r\n?/g, '\n').split('\n\n');
  const rest = blocks.pop() ?? '';
  for (const block of blocks) {
    let event = 'message';
    const data: string[] = [];
    for (const line of block.split('\n')) {
      if (line.startsWith('event:')) event = line.slice(6).trim();
      else if (line.startsWith('data:')) data.push(line.slice(5).replace(/^ /, ''));
    }
    if (data.length > 0) messages.push({ event, data: data.join('\n') });
  }
  return { messages, rest };
}

/**
 * Keeps one event stream open for the whole console (fetch, so the bearer token goes in a header rather
 * than the URL) and reconnects with a growing pause when it drops.
 */
export function createLiveFeed(api: ApiClient): LiveFeed {
  const listeners = new Set<(change: FleetChange) => void>();
  const statusListeners = new Set<(status: LiveStatus) => void>();
  let status: LiveStatus = 'connecting';
  let closed = false;
  let controller = new AbortController();
  let pauseMs = 1000;

  function setStatus(next: LiveStatus) {
    if (next === status) return;
    status = next;
    for (const l of statusListeners) l(next);
  }

  async function run() {
    while (!closed) {
      controller = new AbortController();
      try {
        const res = await api.stream('/events/stream', controller.signal);
        const reader = res.body!.pipeThrough(new TextDecoderStream()).getReader();
        let buffer = '';
        for (;;) {
          const { value, done } = await reader.read();
          if (done) break;
          const parsed = parseSseChunk(buffer + value);
          buffer = parsed.rest;
          for (const m of parsed.messages) {
            if (m.event === 'hello') {
              setStatus('live');
              pauseMs = 1000;
            } else if (m.event === 'change') {
              const change = JSON.parse(m.data) as FleetChange;
              for (const l of listeners) l(change);
            }
          }
        }
      } catch {
        // Dropped or refused: wait and try again below.
      }
      if (closed) break;
      setStatus('reconnecting');
      await new Promise((r) => setTimeout(r, pauseMs));
      pauseMs = Math.min(pauseMs * 2, 15_000);
    }
  }
  void run();

  return {
    subscribe(listener) {
      listeners.add(listener);
      return () => void listeners.delete(listener);
    },
    onStatus(listener) {
      statusListeners.add(listener);
      return () => void statusListeners.delete(listener);
    },
    status: () => status,
    close() {
      closed = true;
      controller.abort();
    },
  };
}
