import { createHash } from 'node:crypto';
import { readFile, rename, writeFile } from 'node:fs/promises';
import { relative, resolve } from 'node:path';
import { parseText, withoutFile } from '../document-files/index.js';
import { onnxInputShape } from '../network-files/index.js';
import { InputError, modelSchema, zodIssues } from '../schema/index.js';
import { listImages, loadImages, type InputSize } from '../tolerance/images.js';
import { parseLabels } from '../tolerance/labels.js';
import { measureTolerance } from '../tolerance/measure.js';
import { openModel } from '../tolerance/runtime.js';
import { guard, parseFlags, printJson, UsageError } from './args.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { num } from './text.js';

export const usage = `usage: ocellus tolerance --model MODEL.json --weights FILE.onnx --images DIR (--labels FILE.csv | --reference-predictions)
                        [--blur-px 0,1,2,3,4] [--snr-db 10,20,30,40] [--seed N] [--out MODEL.json] [--json]
  Measures the model's accuracy at increasing blur and falling signal-to-noise ratio on your own images, running
  the weights on CPU (onnxruntime). Each image is resized to the model's input, blurred with a uniform disc of
  the given diameter in input pixels integrated over the pixel aperture, or given additive Gaussian noise of
  σ = mean / 10^(SNR/20). With --labels (CSV "image,label", class indices) accuracy is top-1 against the labels;
  with --reference-predictions it is agreement with the model's own output on the sharp image (top-1 for a
  classifier, IoU ≥ 0.5 of the output map for a detector or segmenter). Each point has its image count and a
  95 % Wilson score interval. --out writes the model document with its accuracyVsBlur / accuracyVsSnr curves.
  The weights must have the sha256 the model document declares.
`;

function levels(flag: string, raw: string | undefined, fallback: number[], min: number): number[] {
  if (raw === undefined) return fallback;
  const values = raw.split(',').map((p) => Number(p.trim()));
  if (values.length < 2 || values.some((v) => !Number.isFinite(v) || v < min)) {
    throw new UsageError(`--${flag} must list at least two numbers${min === 0 ? ' ≥ 0' : ''}, comma-separated, got '${raw}'`);
  }
  return values;
}

async function readOrFail(path: string, shown: string, what: string): Promise<Buffer> {
  try {
    return await readFile(path);
  } catch (e) {
    const reason = (e as NodeJS.ErrnoException).code === 'ENOENT' ? 'no such file' : (e as Error).message;
    throw new InputError(`cannot read the ${what} ${shown}: ${reason}`, [{ path: '(file)', message: reason }], shown);
  }
}

function progressBar(io: CliIo): (done: number, total: number) => void {
  if (!io.stderrIsTty) return () => {};
  return (done, total) => {
    const width = 30;
    const filled = Math.round((done / total) * width);
    io.stderr(`\r[${'#'.repeat(filled)}${'.'.repeat(width - filled)}] ${done}/${total} renders${done === total ? '\n' : ''}`);
  };
}

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values } = parseFlags(args, {
      model: { type: 'string' },
      weights: { type: 'string' },
      images: { type: 'string' },
      labels: { type: 'string' },
      'reference-predictions': { type: 'boolean' },
      'blur-px': { type: 'string' },
      'snr-db': { type: 'string' },
      seed: { type: 'string' },
      out: { type: 'string' },
      json: { type: 'boolean' },
      help: { type: 'boolean' },
    });
    if (values.help) return io.stdout(usage), EXIT_OK;
    for (const flag of ['model', 'weights', 'images'] as const) if (values[flag] === undefined) throw new UsageError(`missing --${flag}`);
    if ((values.labels === undefined) === (values['reference-predictions'] !== true)) throw new UsageError('give exactly one of --labels FILE.csv or --reference-predictions');
    const blurPx = levels('blur-px', values['blur-px'], [0, 1, 2, 3, 4, 6], 0);
    const snrDb = levels('snr-db', values['snr-db'], [10, 20, 30, 40], -Infinity);
    const seed = values.seed === undefined ? 1 : Number(values.seed);
    if (!Number.isInteger(seed)) throw new UsageError(`--seed must be a whole number, got '${values.seed}'`);
    const at = (p: string) => ({ path: resolve(io.cwd, p), shown: relative(io.cwd, resolve(io.cwd, p)) || p });

    const modelFile = at(values.model!);
    const parsedText = parseText(modelFile.path, (await readOrFail(modelFile.path, modelFile.shown, 'model document')).toString('utf8'));
    if (!parsedText.ok) throw new InputError(`${modelFile.shown} is not a readable document`, [withoutFile(parsedText.issue)], modelFile.shown);
    const parsedModel = modelSchema.safeParse(parsedText.data);
    if (!parsedModel.success) throw new InputError(`${modelFile.shown} is not a usable model document`, zodIssues(parsedModel.error, parsedText.data), modelFile.shown);
    const model = parsedModel.data;

    const weights = at(values.weights!);
    const bytes = await readOrFail(weights.path, weights.shown, 'weights file');
    const sha256 = createHash('sha256').update(bytes).digest('hex');
    if (sha256 !== model.sha256) {
      throw new InputError(`${weights.shown} has sha256 ${sha256}, but model ${model.id} declares ${model.sha256}`, [{ path: 'sha256', message: 'the weights are not the ones the model document describes' }], modelFile.shown);
    }
    const input = onnxInputShape(bytes, weights.shown);
    const channels = input.dims[1] ?? 3;
    if (channels !== 1 && channels !== 3) throw new InputError(`${weights.shown}: input ${input.name} takes ${channels} channels; only 1 (grey) or 3 (RGB) images are measured`, [{ path: 'graph.input[0]', message: 'channels' }], weights.shown);
    const size: InputSize = { channels, widthPx: model.inputWidthPx, heightPx: model.inputHeightPx };

    const dir = at(values.images!);
    const names = await listImages(dir.path, dir.shown);
    let labels: Map<string, number> | undefined;
    if (values.labels !== undefined) {
      const labelsFile = at(values.labels);
      labels = parseLabels((await readOrFail(labelsFile.path, labelsFile.shown, 'labels file')).toString('utf8'), labelsFile.shown, names);
    }
    const images = await loadImages(dir.path, dir.shown, names, size);
    const runner = await openModel(weights.path, weights.shown);
    let result;
    try {
      result = await measureTolerance({ images, size, runner, ...(labels ? { labels } : {}), blurPx, snrDb, seed, onProgress: progressBar(io) });
    } finally {
      await runner.close();
    }

    const curves = {
      accuracyVsBlur: result.accuracyVsBlur,
      accuracyVsSnr: result.accuracyVsSnr,
      curveMetric: result.metric,
      blurUnit: 'input-px' as const,
    };
    if (values.out !== undefined) {
      const out = at(values.out);
      // The document as the user wrote it, with the measured curves; checked before it is written.
      const document = { ...(parsedText.data as object), ...curves };
      modelSchema.parse(document);
      const temporary = `${out.path}.${process.pid}.partial`;
      await writeFile(temporary, JSON.stringify(document, null, 2) + '\n');
      await rename(temporary, out.path);
    }
    if (values.json) return printJson(io, { model: model.id, images: images.length, metric: result.metric, psf: result.psf, noise: result.noise, ...curves }), EXIT_OK;
    io.stdout(`model ${model.id}: ${images.length} images, ${result.metric}\nPSF: ${result.psf}\nnoise: ${result.noise}\n\n`);
    io.stdout('blur (px)  accuracy  95 % interval\n');
    for (const p of result.accuracyVsBlur) io.stdout(`${num(p.blurPx).padStart(9)}  ${num(p.accuracy, 3).padStart(8)}  ${num(p.interval95[0], 3)} – ${num(p.interval95[1], 3)}\n`);
    io.stdout('\nSNR (dB)   accuracy  95 % interval\n');
    for (const p of result.accuracyVsSnr) io.stdout(`${num(p.snrDb).padStart(9)}  ${num(p.accuracy, 3).padStart(8)}  ${num(p.interval95[0], 3)} – ${num(p.interval95[1], 3)}\n`);
    if (values.out !== undefined) io.stdout(`\nwritten ${values.out}\n`);
    return EXIT_OK;
  });
}
