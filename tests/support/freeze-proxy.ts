/**
 * A TCP relay between a device and its broker that can go silent, as a radio link does when a robot drives
 * out of coverage: while frozen, open connections stay open but carry nothing either way, and new ones are
 * closed at once. The broker then sees missed keep-alives, not a closed socket.
 */
import { createConnection, createServer, type Server, type Socket } from 'node:net';

export interface FreezeProxy {
  url: string;
  freeze(): void;
  thaw(): void;
  close(): Promise<void>;
}

export async function startFreezeProxy(upstreamHost: string, upstreamPort: number): Promise<FreezeProxy> {
  let frozen = false;
  const sockets = new Set<Socket>();
  const server: Server = createServer((down) => {
    if (frozen) return void down.destroy();
    const up = createConnection(upstreamPort, upstreamHost);
    sockets.add(down).add(up);
    const relay = (from: Socket, to: Socket) =>
      from.on('data', (chunk) => {
        // Frozen: the bytes are lost, as on a dead link; nothing is closed.
        if (!frozen) to.write(chunk);
      });
    relay(down, up);
    relay(up, down);
    const end = () => {
      down.destroy();
      up.destroy();
      sockets.delete(down);
      sockets.delete(up);
    };
    // A dead link carries no FIN either: while frozen, the device giving up does not reach the broker.
    const downEnded = () => (frozen ? (down.destroy(), sockets.delete(down)) : end());
    down.on('close', downEnded).on('error', downEnded);
    up.on('close', end).on('error', end);
  });
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
  const port = (server.address() as { port: number }).port;
  return {
    url: `mqtt://127.0.0.1:${port}`,
    freeze: () => void (frozen = true),
    thaw: () => void (frozen = false),
    close: () =>
      new Promise<void>((resolve) => {
        for (const s of sockets) s.destroy();
        server.close(() => resolve());
      }),
  };
}
