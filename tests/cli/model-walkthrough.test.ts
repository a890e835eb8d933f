/**
 * The README's "From a model file and your images to a validated profile", command by command as printed,
 * in a fresh folder laid out as it describes: the weights file, the model document, a folder of labelled
 * images (stripe cards the test draws, demo data) and a task profile. Every command must exit as a person
 * following the text would expect, and the check must rest on the imported network and the measured curves.
 */
import { cpSync, existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { dispatch } from '../../src/cli/main.js';
import { deviceClass, task } from '../support/api-fixtures.js';
import { stripeClassifierOnnx, writeStripeCards } from '../support/stripe-classifier.js';
import { createHash } from 'node:crypto';

const REPO = process.cwd();
const work = mkdtempSync(join(tmpdir(), 'ocellus-model-walkthrough-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));

/** The commands of the section's sh block, continuation lines joined, comments dropped, the npm prefix removed. */
export function modelWalkthroughCommands(readme: string): string[][] {
  const section = readme.slice(readme.indexOf('## From a model file'));
  const block = /```sh\n([\s\S]*?)```/.exec(section)![1]!;
  return block
    .replace(/\\\n\s*/g, '')
    .split('\n')
    .map((l) => l.replace(/\s+#.*$/, '').trim())
    .filter((l) => l !== '' && !l.startsWith('#'))
    .map((l) => {
      expect(l.startsWith('npm run -s ocellus -- '), l).toBe(true);
      return l.slice('npm run -s ocellus -- '.length).split(/\s+/);
    });
}

const SIZE = 160;
beforeAll(async () => {
  const bytes = stripeClassifierOnnx(SIZE);
  mkdirSync(join(work, 'weights'));
  writeFileSync(join(work, 'weights', 'leaf-check.onnx'), bytes);
  const cards = await writeStripeCards(join(work, 'shots'), SIZE);
  // The image the README renders is one of the cards under the name it uses.
  cpSync(join(work, 'shots', cards[0]!.name), join(work, 'shots', 'leaf-017.png'));
  writeFileSync(join(work, 'shots', 'labels.csv'), 'image,label\n' + [...cards, { name: 'leaf-017.png', label: cards[0]!.label }].map((c) => `${c.name},${c.label}`).join('\n') + '\n');
  mkdirSync(join(work, 'models'));
  writeFileSync(
    join(work, 'models', 'leaf-check.json'),
    JSON.stringify({
      kind: 'model', id: 'leaf-check', name: 'Leaf check (demo data: a stripe classifier with fixed weights)', version: '1', demoData: true,
      sha256: createHash('sha256').update(bytes).digest('hex'), sizeBytes: bytes.length, inputWidthPx: SIZE, inputHeightPx: SIZE, networkId: 'leaf-net', precision: 'int8',
    }, null, 2),
  );
  mkdirSync(join(work, 'networks'));
  mkdirSync(join(work, 'profiles'));
  writeFileSync(join(work, 'profiles', 'device-class.json'), JSON.stringify(deviceClass, null, 2));
  writeFileSync(join(work, 'profiles', 'task.json'), JSON.stringify({ ...task, minAccuracy: 0.5 }, null, 2));
  mkdirSync(join(work, 'task-profiles'));
  writeFileSync(
    join(work, 'task-profiles', 'leaf-inspection.json'),
    JSON.stringify({
      kind: 'profile', id: 'leaf-inspection', name: 'Leaf inspection (demo data)', demoData: true, taskId: task.id, deviceClassId: deviceClass.id, modelId: 'leaf-check',
      camera: { focusDistanceM: 0.48, fNumber: 4, exposureUs: 2500, analogGain: 1 }, memory: { weightBufferKib: 256, activationBufferKib: 1024 },
    }, null, 2),
  );
});

async function ocellus(args: string[]) {
  const io = captureIo(work);
  const code = await dispatch(args, io);
  return { code, out: io.out(), err: io.err() };
}

describe('the README walk-through from a model file and images to a validated profile', () => {
  it('runs as printed: import, cost, tolerance, render and check, the check resting on the imported network and the measured curves', async () => {
    const commands = modelWalkthroughCommands(readFileSync(join(REPO, 'README.md'), 'utf8'));
    expect(commands.map((c) => c[0])).toEqual(['import-network', 'cost', 'tolerance', 'render', 'check']);
    const results = [];
    for (const args of commands) {
      const r = await ocellus(args);
      results.push(r);
      if (args[0] !== 'check') expect(r.code, `${args.join(' ')}\n${r.err}`).toBe(0);
    }
    const model = JSON.parse(readFileSync(join(work, 'models', 'leaf-check.json'), 'utf8'));
    expect(model.curveMetric).toBe('top1-vs-labels');
    expect(model.accuracyVsBlur[0].accuracy).toBe(1);
    expect(JSON.parse(readFileSync(join(work, 'networks', 'leaf-net.json'), 'utf8')).id).toBe('leaf-net');
    expect(existsSync(join(work, 'shots', 'leaf-017-seen.png'))).toBe(true);
    const check = results.at(-1)!;
    expect(check.err).toBe('');
    expect(check.code).toBe(0);
    expect(check.out).toContain('model leaf-check runs network leaf-net');
    // The blur tolerance comes from the curve step 2 measured (accuracy 1.0 sharp, falling with blur), not from a default.
    expect(check.out).toMatch(/blur-over-range .*tolerance from where the model's accuracy-vs-blur curve falls to 0\.5/);
    expect(check.out).toContain('1 profiles: 0 pass, 1 pass with warnings, 0 fail');
  });
});
