/**
 * `ocellus-agent`: the robot-side agent's entry point, and the only file of the agent that reads
 * argv and the environment or exits the process.
 *
 *   ocellus-agent [run] [--config FILE] [--device-id ID] [--broker-url URL] ...   start the agent
 *   ocellus-agent task NAME [--data-dir DIR | --control-port N | --control-socket PATH]
 *   ocellus-agent motion moving|stopped [same endpoint options]
 *   ocellus-agent state [same endpoint options]
 */
import { readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { describeIssues } from '../src/schema/issues.js';
import { createAgent } from './agent.js';
import { msText } from './event-lines.js';
import { resolveAgentSettings, resolvePassword, envOf, flagOf, agentSettingsSchema } from './config.js';
import { callControl } from './control-client.js';
import type { ControlEndpoint } from './control-server.js';
import { systemClock } from './clock.js';
import { selectDriver } from './drivers/select-driver.js';
import { HELP } from './help.js';
import { selectTaskSource } from './task-sources/select-source.js';
import type { TaskSource } from './task-sources/task-source.js';

const USAGE = `usage:
  ocellus-agent [run] [options]              start the agent
  ocellus-agent task NAME [endpoint] [--json] switch the running task
  ocellus-agent motion moving|stopped [endpoint]
  ocellus-agent state [endpoint]             print the agent's state
endpoint: --data-dir DIR (reads DIR/control.json), --control-port N, or --control-socket PATH
options (also OCELLUS_AGENT_* variables or a JSON file given by --config):
  ${Object.keys(agentSettingsSchema.shape).map((k) => `${flagOf(k)} (${envOf(k)})`).join('\n  ')}`;

function fail(message: string, code = 2): never {
  process.stderr.write(`${message}\n`);
  process.exit(code);
}

function endpointFrom(argv: string[]): ControlEndpoint {
  const flag = (name: string) => {
    const i = argv.findIndex((a) => a === name || a.startsWith(`${name}=`));
    if (i < 0) return undefined;
    return argv[i]!.includes('=') ? argv[i]!.slice(name.length + 1) : argv[i + 1];
  };
  const socketPath = flag('--control-socket') ?? process.env.OCELLUS_AGENT_CONTROL_SOCKET;
  if (socketPath) return { kind: 'unix', socketPath };
  const port = flag('--control-port') ?? process.env.OCELLUS_AGENT_CONTROL_PORT;
  if (port) return { kind: 'tcp', host: '127.0.0.1', port: Number(port) };
  const dataDir = flag('--data-dir') ?? process.env.OCELLUS_AGENT_DATA_DIR;
  if (dataDir) {
    try {
      return JSON.parse(readFileSync(join(dataDir, 'control.json'), 'utf8')) as ControlEndpoint;
    } catch (e) {
      fail(`${join(dataDir, 'control.json')}: cannot read the agent's control endpoint (${(e as Error).message}); is the agent running?`);
    }
  }
  return { kind: 'tcp', host: '127.0.0.1', port: 7717 };
}

async function control(argv: string[], method: 'GET' | 'POST', path: string, body?: unknown): Promise<never> {
  try {
    const res = await callControl(endpointFrom(argv), method, path, body);
    const ok = res.status >= 200 && res.status < 300;
    if (argv.includes('--json') || path !== '/task') process.stdout.write(`${JSON.stringify(res.body, null, 2)}\n`);
    else {
      // A line for people; --json gives the control endpoint's answer.
      const b = res.body as { task?: string; unchanged?: boolean; actuationMs?: number; error?: string };
      const text = ok
        ? b.unchanged ? `task ${b.task} was already running` : `switched to task ${b.task} (actuation ${msText(b.actuationMs ?? 0)})`
        : `task not switched: ${b.error ?? JSON.stringify(res.body)}`;
      (ok ? process.stdout : process.stderr).write(`${text}\n`);
    }
    process.exit(ok ? 0 : 1);
  } catch (e) {
    fail(`cannot reach the agent's control endpoint: ${(e as Error).message}`, 1);
  }
}

async function run(argv: string[]): Promise<void> {
  const resolved = resolveAgentSettings({ argv, env: process.env, readFile: (p) => readFileSync(p, 'utf8') });
  if (!resolved.ok) fail(`ocellus-agent: bad configuration\n${describeIssues(resolved.issues)}\n\n${USAGE}`);
  const { publicKeyPath, password: _given, passwordFile: _file, ...settings } = resolved.settings;
  const secret = resolvePassword(resolved.settings, { modeOf: (p) => statSync(p).mode, readFile: (p) => readFileSync(p, 'utf8') });
  if (!secret.ok) fail(`ocellus-agent: bad configuration\n${describeIssues([secret.issue])}`);
  let publicKeyPem: string;
  try {
    publicKeyPem = readFileSync(publicKeyPath, 'utf8');
  } catch (e) {
    fail(`${publicKeyPath}: cannot read the server's public key (${(e as Error).message})`);
  }
  const log = (line: string) => process.stdout.write(`${new Date().toISOString()} ${line}\n`);
  const driver = await selectDriver(resolved.settings, systemClock, log);
  let source: TaskSource | null = null;
  const agent = createAgent({ config: { ...settings, password: secret.password, publicKeyPem }, driver, log, onStateChange: (state) => source?.report(state) });
  source = await selectTaskSource(resolved.settings, { setTask: (task) => agent.robotTask(task), setMotion: (moving) => agent.setMotion(moving), log });
  let stopping = false;
  const stop = () => {
    if (stopping) return;
    stopping = true;
    Promise.resolve(source?.close()).then(() => agent.stop()).then(
      () => process.exit(0),
      (e: unknown) => fail(`agent: stop failed: ${(e as Error).message}`, 1),
    );
  };
  process.on('SIGINT', stop);
  process.on('SIGTERM', stop);
  log(`agent: device ${settings.deviceId}, driver ${driver.name}, data in ${settings.dataDir}`);
  await agent.start();
  const ep = agent.controlEndpoint();
  log(`agent: control endpoint ${ep?.kind === 'unix' ? ep.socketPath : `http://${ep?.host}:${ep?.port}`}`);
  if (source) {
    source.start();
    log(`agent: task source ${source.name}`);
  }
}

const [command, ...rest] = process.argv.slice(2);
switch (command) {
  case 'task':
    if (!rest[0] || rest[0].startsWith('--')) fail(`ocellus-agent task: name the task\n\n${USAGE}`);
    await control(rest.slice(1), 'POST', '/task', { task: rest[0] });
    break;
  case 'motion':
    if (rest[0] !== 'moving' && rest[0] !== 'stopped') fail(`ocellus-agent motion: say "moving" or "stopped"\n\n${USAGE}`);
    await control(rest.slice(1), 'POST', '/motion', { moving: rest[0] === 'moving' });
    break;
  case 'state':
    await control(rest, 'GET', '/state');
    break;
  case 'help':
  case '--help':
    process.stdout.write(`${USAGE}\n\n${HELP}\n`);
    break;
  case 'run':
    await run(rest).catch((e: unknown) => fail(`agent: ${(e as Error).message}`, 1));
    break;
  default:
    await run(process.argv.slice(2)).catch((e: unknown) => fail(`agent: ${(e as Error).message}`, 1));
}
