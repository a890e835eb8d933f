import { createServer } from 'node:net';

/** Why a port cannot be listened on, or null when it is free (checked by listening on it for a moment). */
export function portInUse(host: string, port: number): Promise<string | null> {
  if (port === 0) return Promise.resolve(null);
  return new Promise((resolve) => {
    const probe = createServer();
    probe.once('error', (e: NodeJS.ErrnoException) => resolve(e.code === 'EADDRINUSE' ? 'in use' : (e.code ?? e.message)));
    probe.listen({ host, port, exclusive: true }, () => probe.close(() => resolve(null)));
  });
}

/** The error line for a port that is taken, naming the flag that changes it. */
export function portTakenMessage(what: string, host: string, port: number, why: string, flag: string): string {
  const hint = why === 'in use' ? ' (another Ocellus server, the demo, or another program)' : '';
  return `error: cannot listen for ${what} on ${host}:${port}: ${why}${hint}; choose another port with ${flag} N (0 picks a free one)`;
}
