import { createHash } from 'node:crypto';
import { readFile, rename, writeFile } from 'node:fs/promises';
import { basename, extname, relative, resolve } from 'node:path';
import { importNetworkFile } from '../network-files/index.js';
import { analyzeNetwork } from '../physics/network-cost.js';
import { InputError, networkSchema, precisionSchema, type Precision } from '../schema/index.js';
import { guard, parseFlags, printJson, UsageError } from './args.js';
import { costFigures } from './cost-figures.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { num, table } from './text.js';

export const usage = `usage: ocellus import-network <model.onnx|model.tflite> [--input-shape N,C,H,W] [--id ID] [--name NAME] [--out FILE] [--precision int8|fp16] [--json]
  Reads a deployed model file and writes the network document its weights describe: one layer per node that
  computes on the image, every tensor's shape inferred (shapes computed inside the graph are folded), weights
  counted whether stored as initializers or Constant nodes. An operator this importer does not know is an error
  naming the node. --input-shape fixes symbolic input dimensions (N must be 1: costs are per image); it is N,C,H,W for
  TFLite files too, whose NHWC input is set from it. TFLite files: weights are counted whatever their stored
  type; their bytes follow --precision (int8: 1 byte per parameter), and the stored types are listed.
  --out FILE writes the document (JSON); without it a summary is printed. --json prints
  {network, macs, params, batch_norm_params, peak_activation_bytes, layers[…]} with the keys of 'ocellus cost --json'.
`;

function parseShape(raw: string): number[] {
  const dims = raw.split(',').map((p) => Number(p.trim()));
  if (dims.length !== 4 || dims.some((d) => !Number.isInteger(d) || d < 1)) {
    throw new UsageError(`--input-shape must be four whole numbers N,C,H,W, got '${raw}'`);
  }
  return dims;
}

const slug = (file: string): string =>
  basename(file, extname(file)).toLowerCase().replace(/[^a-z0-9._-]+/g, '-').replace(/^[^a-z0-9]+/, '').slice(0, 64) || 'imported';

/** "int8 4,209,088; int32 1,000": parameters by the element type the file stores them in. */
function storageText(storage: Record<string, number>): string {
  return Object.entries(storage)
    .sort((a, b) => b[1] - a[1])
    .map(([type, n]) => `${type} ${n.toLocaleString('en-US')}`)
    .join('; ');
}

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values, positionals } = parseFlags(
      args,
      {
        'input-shape': { type: 'string' },
        id: { type: 'string' },
        name: { type: 'string' },
        out: { type: 'string' },
        precision: { type: 'string' },
        json: { type: 'boolean' },
        help: { type: 'boolean' },
      },
      true,
    );
    if (values.help) return io.stdout(usage), EXIT_OK;
    if (positionals.length !== 1) throw new UsageError('give exactly one model file (.onnx or .tflite)');
    let precision: Precision = 'int8';
    if (values.precision !== undefined) {
      const p = precisionSchema.safeParse(values.precision);
      if (!p.success) throw new UsageError(`--precision must be int8 or fp16, got '${values.precision}'`);
      precision = p.data;
    }
    const path = resolve(io.cwd, positionals[0]!);
    const shown = relative(io.cwd, path) || path;
    let bytes: Buffer;
    try {
      bytes = await readFile(path);
    } catch (e) {
      const reason = (e as NodeJS.ErrnoException).code === 'ENOENT' ? 'no such file' : (e as Error).message;
      throw new InputError(`cannot read ${shown}: ${reason}`, [{ path: '(file)', message: reason }], shown);
    }
    const sha256 = createHash('sha256').update(bytes).digest('hex');
    const imported = importNetworkFile(bytes, shown, {
      ...(values['input-shape'] !== undefined ? { inputShape: parseShape(values['input-shape']) } : {}),
      id: values.id ?? slug(shown),
      name: values.name ?? basename(shown),
    });
    const storage = imported.weightStorage ? storageText(imported.weightStorage) : undefined;
    const stored = storage ? ` Weights stored as ${storage}; bytes are counted from the model's precision.` : '';
    const network = { ...imported.network, notes: `Imported from ${basename(shown)} (sha256 ${sha256}).${stored}` };
    const parsed = networkSchema.parse(network);
    const analysis = analyzeNetwork(parsed);
    if (values.out !== undefined) {
      const out = resolve(io.cwd, values.out);
      const temporary = `${out}.${process.pid}.partial`;
      await writeFile(temporary, JSON.stringify(network, null, 2) + '\n');
      await rename(temporary, out);
    }
    if (values.json) return printJson(io, { network, ...costFigures(analysis, precision) }), EXIT_OK;
    io.stdout(
      table([
        ['file', `${shown} (${imported.format}, sha256 ${sha256.slice(0, 12)}…)`],
        ['input', `${parsed.input.channels}×${parsed.input.height}×${parsed.input.width} (c×h×w)`],
        ['layers', String(parsed.layers.length)],
        ['multiply-accumulates', num(analysis.macs, 6)],
        ['parameters', num(analysis.params, 6)],
        ...(storage ? [['weights stored', storage] as [string, string]] : []),
        ['batch-norm parameters', `${num(analysis.batchNormParams, 6)} (not in parameters; folded at deployment)`],
        ...(values.out !== undefined ? [['written', values.out] as [string, string]] : []),
      ]),
    );
    return EXIT_OK;
  });
}
