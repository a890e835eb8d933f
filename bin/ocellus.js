#!/usr/bin/env node
// Launcher: runs the TypeScript entry through tsx, passing arguments, exit code and signals through.
import { spawn } from 'node:child_process';
import { fileURLToPath } from 'node:url';

const entry = fileURLToPath(new URL('../src/cli/main.ts', import.meta.url));
const tsx = import.meta.resolve('tsx');
const child = spawn(process.execPath, ['--import', tsx, entry, ...process.argv.slice(2)], { stdio: 'inherit' });
for (const signal of ['SIGINT', 'SIGTERM', 'SIGHUP']) process.on(signal, () => child.kill(signal));
child.on('exit', (code, signal) => {
  if (!signal) process.exit(code ?? 1);
  // Leave the same way the child did.
  process.removeAllListeners(signal);
  process.kill(process.pid, signal);
});
