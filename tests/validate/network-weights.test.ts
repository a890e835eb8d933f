import { createHash } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { withShippedNetwork } from '../../src/cli/shipped-network.js';
import { networkSchema } from '../../src/schema/index.js';
import { validate } from '../../src/validate/index.js';
import { stripeClassifierOnnx, stripeNetwork } from '../support/stripe-classifier.js';
import { checkOf, fixture } from '../support/validate-fixtures.js';

const tmp = mkdtempSync(join(tmpdir(), 'ocellus-weights-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));
const bytes = stripeClassifierOnnx(16);
writeFileSync(join(tmp, 'stripes.onnx'), bytes);
const sha256 = createHash('sha256').update(bytes).digest('hex');

function inputFor(declared: ReturnType<typeof stripeNetwork>, modelPatch: Record<string, unknown> = {}) {
  const base = fixture({ model: { networkId: declared.id, networkFrom: 'weights', weightsFile: 'stripes.onnx', sha256, inputWidthPx: 16, inputHeightPx: 16, ...modelPatch } });
  const input = { ...base, network: declared };
  const catalog = { documents: [{ kind: 'model' as const, file: join(tmp, 'model.json'), value: input.model }], issues: [] };
  return withShippedNetwork(catalog as never, input, tmp);
}

describe('networkFrom "weights": the shipped file is costed, and a declared network must match it', () => {
  it('a declared network equal to the file passes, and the costs come from the file', async () => {
    const input = await inputFor(stripeNetwork(16));
    expect(input.shippedNetwork).toBeDefined();
    const c = checkOf(validate(input), 'network-weights');
    expect(c.status).toBe('pass');
    // 2×2 conv, 3 → 4 channels over 15×15 outputs, and a 4 → 3 classifier (Howard et al. 2017 counting).
    expect(c.actual).toBe(2 * 2 * 3 * 4 * 15 * 15 + 4 * 3);
  });

  it('a declared network that differs from the file (8 filters instead of 4) is a failing check naming the layer', async () => {
    const declared = stripeNetwork(16);
    const other = networkSchema.parse({ ...declared, layers: declared.layers.map((l) => (l.op === 'conv' ? { ...l, out: 8 } : l)) });
    const report = validate(await inputFor(other));
    const c = checkOf(report, 'network-weights');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('costed layer 0 differs: declared gradients conv 8×15×15');
    expect(report.status).toBe('fail');
  });

  it('weights with another sha256 than the model declares fail the check, saying so', async () => {
    const c = checkOf(validate(await inputFor(stripeNetwork(16), { sha256: 'b'.repeat(64) })), 'network-weights');
    expect(c.status).toBe('fail');
    expect(c.message).toContain(`stripes.onnx has sha256 ${sha256}, the model declares ${'b'.repeat(64)}`);
  });

  it('a missing weights file fails the check naming it', async () => {
    const c = checkOf(validate(await inputFor(stripeNetwork(16), { weightsFile: 'absent.onnx' })), 'network-weights');
    expect(c.status).toBe('fail');
    expect(c.message).toContain('cannot read absent.onnx: no such file');
  });

  it('a model without networkFrom has no such check', () => {
    expect(validate(fixture()).checks.some((c) => c.code === 'network-weights')).toBe(false);
  });
});
