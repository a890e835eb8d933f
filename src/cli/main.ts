import { realpathSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { EXIT_BAD_INPUT, EXIT_OK } from './io.js';
import type { CliIo, CommandRun } from './io.js';

interface CommandEntry {
  summary: string;
  load: () => Promise<{ run: CommandRun }>;
}

/** The `ocellus` commands: one line each; a command is a module exporting `run(args, io)`. */
export const commands: Record<string, CommandEntry> = {
  check: { summary: 'validate every profile under files or folders', load: () => import('./check.js') },
  cost: { summary: 'MACs, parameters and (with a device class) latency and energy of a network', load: () => import('./cost.js') },
  'import-network': { summary: 'read an .onnx model file and write the network document its weights describe', load: () => import('./import-network.js') },
  tolerance: { summary: "measure a model's accuracy against blur and noise on your own images (onnxruntime, CPU)", load: () => import('./tolerance.js') },
  render: { summary: "what the robot's network would see: a sample image through a profile's blur and noise", load: () => import('./render.js') },
  optics: { summary: 'hyperfocal distance, depth of field, diffraction and blur circles', load: () => import('./optics.js') },
  mtf: { summary: 'MTF of the image chain: diffraction, defocus, pixel and motion; MTF50 and equivalent blur', load: () => import('./mtf.js') },
  exposure: { summary: 'exposure value, EV100 and focal-plane exposure', load: () => import('./exposure.js') },
  photons: { summary: 'photons, electrons and SNR of one pixel (EMVA 1288)', load: () => import('./photons.js') },
  light: { summary: 'photons and electrons of one pixel for light of a given spectrum (CIE illuminants, LEDs)', load: () => import('./light.js') },
  schema: { summary: 'print the JSON Schema of a document kind', load: () => import('./schema.js') },
  plan: { summary: 'search settings for a task on a device class and list the best feasible candidates', load: () => import('./plan.js') },
  serve: { summary: 'run the server: HTTP API, signed releases, weights store', load: () => import('./serve.js') },
  key: { summary: 'rotate the release signing key (the old key signs the new one in)', load: () => import('./key.js') },
  token: { summary: 'create an API token in the server\'s data folder (shown once)', load: () => import('./token.js') },
  push: { summary: 'send documents (and weights) to a running server in dependency order', load: () => import('./push.js') },
  release: { summary: 'build and sign a release on a running server', load: () => import('./release.js') },
  device: { summary: 'enrol devices, assign a release to one device, list devices', load: () => import('./device.js') },
  rollout: { summary: 'roll a release out in gated waves; status, pause, resume, abort, rollback', load: () => import('./rollout.js') },
  history: { summary: 'which task profile a device ran when, and the change behind it (text, CSV or JSON)', load: () => import('./history.js') },
  demo: { summary: 'run the server, its broker and simulated greenhouse robots with demo data, with a staged rollout', load: () => import('./demo.js') },
};

export function helpText(): string {
  const width = Math.max(...Object.keys(commands).map((n) => n.length));
  const lines = Object.entries(commands).map(([name, c]) => `  ${name.padEnd(width)}  ${c.summary}`);
  return `usage: ocellus <command> [options]\n\ncommands:\n${lines.join('\n')}\n  ${'help'.padEnd(width)}  this text; 'ocellus help <command>' or '<command> --help' for one command\n\nOutput is for people by default; --json prints data for machines.\nExit codes: 0 all checks pass, 1 a check fails, 2 bad usage or bad input.\n`;
}

/** Pick the command named by the first argument and run it with the rest. */
export async function dispatch(args: string[], io: CliIo): Promise<number> {
  const [name, ...rest] = args;
  if (name === undefined || name === 'help' || name === '--help' || name === '-h') {
    const topic = name === 'help' ? rest[0] : undefined;
    if (topic !== undefined && commands[topic]) return (await commands[topic].load()).run(['--help'], io);
    if (topic !== undefined) {
      io.stderr(`error: unknown command '${topic}'\n\n${helpText()}`);
      return EXIT_BAD_INPUT;
    }
    if (name === undefined) {
      io.stderr(helpText());
      return EXIT_BAD_INPUT;
    }
    io.stdout(helpText());
    return EXIT_OK;
  }
  const entry = Object.hasOwn(commands, name) ? commands[name] : undefined;
  if (!entry) {
    io.stderr(`error: unknown command '${name}'\n\n${helpText()}`);
    return EXIT_BAD_INPUT;
  }
  return (await entry.load()).run(rest, io);
}

function isEntryPoint(): boolean {
  const script = process.argv[1];
  if (!script) return false;
  try {
    return realpathSync(script) === realpathSync(fileURLToPath(import.meta.url));
  } catch {
    return false;
  }
}

if (isEntryPoint()) {
  const io: CliIo = {
    stdout: (t) => void process.stdout.write(t),
    stderr: (t) => void process.stderr.write(t),
    cwd: process.cwd(),
    env: process.env,
    stderrIsTty: process.stderr.isTTY === true,
  };
  dispatch(process.argv.slice(2), io).then(
    (code) => {
      // Let piped output drain before leaving.
      process.stdout.write('', () => process.stderr.write('', () => process.exit(code)));
    },
    (error: unknown) => {
      process.stderr.write(`ocellus: unexpected error: ${error instanceof Error ? (error.stack ?? error.message) : String(error)}\n`, () => process.exit(70));
    },
  );
}
