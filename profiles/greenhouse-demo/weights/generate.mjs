#!/usr/bin/env node
// Demo data: writes small deterministic stand-in weight files for the greenhouse demo models, so the
// server demo has real bytes to upload and hash. They are not trained weights: the bytes are a SHA-256
// counter stream seeded by the model id. Run `node generate.mjs` to (re)write them, `--check` to verify.
import { createHash } from 'node:crypto';
import { readFileSync, writeFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

/** Model id and file size in bytes (int8 models 64 KiB, fp16 models 128 KiB). */
export const DEMO_WEIGHTS = [
  ['row-guide-a', 64 * 1024],
  ['row-guide-b', 128 * 1024],
  ['fruit-finder-a', 64 * 1024],
  ['fruit-finder-b', 128 * 1024],
  ['leaf-check-a', 64 * 1024],
  ['leaf-check-b', 128 * 1024],
];

export function demoWeights(modelId, sizeBytes) {
  const out = Buffer.alloc(sizeBytes);
  for (let block = 0, at = 0; at < sizeBytes; block++, at += 32) {
    createHash('sha256').update(`ocellus greenhouse demo weights ${modelId} ${block}`).digest().copy(out, at);
  }
  return out;
}

const folder = fileURLToPath(new URL('.', import.meta.url));
const check = process.argv.includes('--check');
let bad = 0;
for (const [id, size] of DEMO_WEIGHTS) {
  const bytes = demoWeights(id, size);
  const file = `${folder}${id}.bin`;
  if (check) {
    const same = Buffer.compare(readFileSync(file), bytes) === 0;
    if (!same) bad++;
    console.log(`${same ? 'ok ' : 'BAD'} ${id}.bin`);
  } else {
    writeFileSync(file, bytes);
    console.log(`${id}.bin ${size} bytes sha256 ${createHash('sha256').update(bytes).digest('hex')}`);
  }
}
process.exitCode = bad ? 1 : 0;
