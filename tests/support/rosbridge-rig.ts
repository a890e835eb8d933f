/**
 * A rosbridge-protocol server on loopback, written for the tests from the open rosbridge v2 protocol
 * specification (RobotWebTools rosbridge_suite, ROSBRIDGE_PROTOCOL.md): JSON operations `subscribe`,
 * `unsubscribe`, `advertise`, `unadvertise` and `publish` over WebSocket. It stands in for a ROS 2 robot:
 * `robotPublish` is the robot publishing on a topic; the last message of each robot topic is kept and
 * sent to new subscribers, as a ROS 2 publisher with transient-local durability does.
 */
import { WebSocketServer, type WebSocket } from 'ws';

export interface RosbridgeRig {
  url: string;
  robotPublish(topic: string, msg: unknown): void;
  /** What clients published on a topic, oldest first. */
  published(topic: string): unknown[];
  /** Every operation clients sent, oldest first. */
  ops: Array<Record<string, unknown>>;
  clients(): number;
  /** The bridge goes away (every connection is cut); `start` brings it back on the same port. */
  stop(): Promise<void>;
  start(): Promise<void>;
}

export async function startRosbridge(): Promise<RosbridgeRig> {
  let port = 0;
  let wss: WebSocketServer | null = null;
  const subscribers = new Map<string, Set<WebSocket>>();
  const latched = new Map<string, unknown>();
  const fromClients = new Map<string, unknown[]>();
  const ops: Array<Record<string, unknown>> = [];

  function send(ws: WebSocket, topic: string, msg: unknown) {
    ws.send(JSON.stringify({ op: 'publish', topic, msg }));
  }

  const start = () =>
    new Promise<void>((resolve) => {
      wss = new WebSocketServer({ host: '127.0.0.1', port }, () => {
        port = (wss!.address() as { port: number }).port;
        resolve();
      });
      wss.on('connection', (ws) => {
        ws.on('message', (data) => {
          const op = JSON.parse(data.toString()) as Record<string, unknown> & { op: string; topic: string };
          ops.push(op);
          if (op.op === 'subscribe') {
            if (!subscribers.has(op.topic)) subscribers.set(op.topic, new Set());
            subscribers.get(op.topic)!.add(ws);
            if (latched.has(op.topic)) send(ws, op.topic, latched.get(op.topic));
          } else if (op.op === 'unsubscribe') subscribers.get(op.topic)?.delete(ws);
          else if (op.op === 'publish') {
            if (!fromClients.has(op.topic)) fromClients.set(op.topic, []);
            fromClients.get(op.topic)!.push(op.msg);
          }
        });
        ws.on('close', () => {
          for (const set of subscribers.values()) set.delete(ws);
        });
      });
    });
  await start();
  return {
    get url() {
      return `ws://127.0.0.1:${port}`;
    },
    robotPublish(topic, msg) {
      latched.set(topic, msg);
      for (const ws of subscribers.get(topic) ?? []) send(ws, topic, msg);
    },
    published: (topic) => fromClients.get(topic) ?? [],
    ops,
    clients: () => wss?.clients.size ?? 0,
    stop: () =>
      new Promise<void>((resolve) => {
        for (const ws of wss?.clients ?? []) ws.terminate();
        subscribers.clear();
        wss?.close(() => resolve());
        wss = null;
      }),
    start,
  };
}
