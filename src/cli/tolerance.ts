import { createHash } from 'node:crypto';
import { mkdtemp, readFile, rename, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join, relative, resolve } from 'node:path';
import { ApiError, type ApiClient } from '../api-client/api-client.js';
import { parseText, withoutFile } from '../document-files/index.js';
import { onnxInputShape } from '../network-files/index.js';
import { InputError, modelSchema, zodIssues, type Model } from '../schema/index.js';
import { listImages, loadImages, type InputSize } from '../tolerance/images.js';
import { parseLabels } from '../tolerance/labels.js';
import { measureTolerance } from '../tolerance/measure.js';
import { openModel } from '../tolerance/runtime.js';
import { guard, parseFlags, printJson, UsageError } from './args.js';
import { createServerClient, reportServerError } from './server-client.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { num } from './text.js';

export const usage = `usage: ocellus tolerance (--model MODEL.json --weights FILE.onnx | --model-id ID [--weights FILE.onnx] [--server URL] [--token T])
                        --images DIR (--labels FILE.csv | --reference-predictions)
                        [--blur-px 0,1,2,3,4] [--snr-db 10,20,30,40] [--seed N] [--out MODEL.json] [--json]
  Measures the model's accuracy at increasing blur and falling signal-to-noise ratio on your own images, running
  the weights on CPU (onnxruntime). Each image is resized to the model's input, blurred with a uniform disc of
  the given diameter in input pixels integrated over the pixel aperture, or given additive Gaussian noise of
  σ = mean / 10^(SNR/20). With --labels (CSV "image,label", class indices) accuracy is top-1 against the labels;
  with --reference-predictions it is agreement with the model's own output on the sharp image (top-1 for a
  classifier, IoU ≥ 0.5 of the output map for a detector or segmenter). Each point has its image count and a
  95 % Wilson score interval. --out writes the model document with its accuracyVsBlur / accuracyVsSnr curves.
  The weights must have the sha256 the model document declares.
  --model-id ID reads the model stored on the server (--server/--token, or OCELLUS_SERVER / OCELLUS_TOKEN; an
  engineer token) instead of a file, takes its uploaded weights when --weights is not given, and saves the
  measured curves as the model's next version; --out then also writes that document to a file. Nothing is
  saved when the model changed on the server while measuring.
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
      'model-id': { type: 'string' },
      server: { type: 'string' },
      token: { type: 'string' },
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
    if ((values.model === undefined) === (values['model-id'] === undefined)) throw new UsageError('give exactly one of --model MODEL.json or --model-id ID');
    if (values.images === undefined) throw new UsageError('missing --images');
    if (values.model !== undefined && values.weights === undefined) throw new UsageError('missing --weights');
    if ((values.labels === undefined) === (values['reference-predictions'] !== true)) throw new UsageError('give exactly one of --labels FILE.csv or --reference-predictions');
    const blurPx = levels('blur-px', values['blur-px'], [0, 1, 2, 3, 4, 6], 0);
    const snrDb = levels('snr-db', values['snr-db'], [10, 20, 30, 40], -Infinity);
    const seed = values.seed === undefined ? 1 : Number(values.seed);
    if (!Number.isInteger(seed)) throw new UsageError(`--seed must be a whole number, got '${values.seed}'`);
    const at = (p: string) => ({ path: resolve(io.cwd, p), shown: relative(io.cwd, resolve(io.cwd, p)) || p });

    let source: ModelSource;
    try {
      source = values.model !== undefined ? await modelFromFile(at(values.model)) : await modelFromServer(createServerClient(values, io), values['model-id']!);
    } catch (e) {
      if (e instanceof ApiError) return reportServerError(io, e);
      throw e;
    }
    const { model } = source;
    const modelShown = source.shown;

    let weights: { path: string; shown: string };
    let bytes: Buffer;
    let downloaded: string | undefined;
    if (values.weights !== undefined) {
      weights = at(values.weights);
      bytes = await readOrFail(weights.path, weights.shown, 'weights file');
    } else {
      // The uploaded weights of the stored model, kept in a temporary folder while the runtime reads them.
      try {
        bytes = Buffer.from(await source.client!.bytes(`/api/v1/models/${encodeURIComponent(model.id)}/weights`));
      } catch (e) {
        if (e instanceof ApiError) return reportServerError(io, e);
        throw e;
      }
      downloaded = await mkdtemp(join(tmpdir(), 'ocellus-tolerance-'));
      weights = { path: join(downloaded, 'weights.onnx'), shown: `the uploaded weights of model ${model.id}` };
      await writeFile(weights.path, bytes);
    }
    try {
      return await measureAndSave();
    } finally {
      if (downloaded) await rm(downloaded, { recursive: true, force: true });
    }

    async function measureAndSave(): Promise<number> {
      const sha256 = createHash('sha256').update(bytes).digest('hex');
      if (sha256 !== model.sha256) {
        throw new InputError(`${weights.shown} has sha256 ${sha256}, but model ${model.id} declares ${model.sha256}`, [{ path: 'sha256', message: 'the weights are not the ones the model document describes' }], modelShown);
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
      // The document as the user wrote it (or as the server holds it), with the measured curves; checked before it is written.
      const document = { ...source.document, ...curves };
      modelSchema.parse(document);
      let savedVersion: number | undefined;
      if (source.client) {
        try {
          savedVersion = await saveToServer(source.client, model.id, source.version, document);
        } catch (e) {
          if (e instanceof ApiError) return reportServerError(io, e);
          throw e;
        }
      }
      if (values.out !== undefined) {
        const out = at(values.out);
        const temporary = `${out.path}.${process.pid}.partial`;
        await writeFile(temporary, JSON.stringify(document, null, 2) + '\n');
        await rename(temporary, out.path);
      }
      if (values.json) return printJson(io, { model: model.id, images: images.length, metric: result.metric, psf: result.psf, noise: result.noise, ...curves, ...(savedVersion !== undefined ? { savedVersion } : {}) }), EXIT_OK;
      io.stdout(`model ${model.id}: ${images.length} images, ${result.metric}\nPSF: ${result.psf}\nnoise: ${result.noise}\n\n`);
      io.stdout('blur (px)  accuracy  95 % interval\n');
      for (const p of result.accuracyVsBlur) io.stdout(`${num(p.blurPx).padStart(9)}  ${num(p.accuracy, 3).padStart(8)}  ${num(p.interval95[0], 3)} – ${num(p.interval95[1], 3)}\n`);
      io.stdout('\nSNR (dB)   accuracy  95 % interval\n');
      for (const p of result.accuracyVsSnr) io.stdout(`${num(p.snrDb).padStart(9)}  ${num(p.accuracy, 3).padStart(8)}  ${num(p.interval95[0], 3)} – ${num(p.interval95[1], 3)}\n`);
      if (savedVersion !== undefined) io.stdout(`\nsaved as version ${savedVersion} of model ${model.id} on the server\n`);
      if (values.out !== undefined) io.stdout(`\nwritten ${values.out}\n`);
      return EXIT_OK;
    }
  });
}

interface ModelSource {
  model: Model;
  /** The document as written (file) or stored (server), to which the curves are added. */
  document: Record<string, unknown>;
  shown: string;
  client?: ApiClient;
  version?: number;
}

async function modelFromFile(file: { path: string; shown: string }): Promise<ModelSource> {
  const parsedText = parseText(file.path, (await readOrFail(file.path, file.shown, 'model document')).toString('utf8'));
  if (!parsedText.ok) throw new InputError(`${file.shown} is not a readable document`, [withoutFile(parsedText.issue)], file.shown);
  const parsed = modelSchema.safeParse(parsedText.data);
  if (!parsed.success) throw new InputError(`${file.shown} is not a usable model document`, zodIssues(parsed.error, parsedText.data), file.shown);
  return { model: parsed.data, document: parsedText.data as Record<string, unknown>, shown: file.shown };
}

async function modelFromServer(client: ApiClient, id: string): Promise<ModelSource> {
  const record = await client.get<{ version: number; document: Record<string, unknown> }>(`/models/${encodeURIComponent(id)}`);
  const shown = `model ${id} on ${client.baseUrl}`;
  const parsed = modelSchema.safeParse(record.document);
  if (!parsed.success) throw new InputError(`${shown} is not a usable model document`, zodIssues(parsed.error, record.document), shown);
  return { model: parsed.data, document: record.document, shown, client, version: record.version };
}

/** Saves the curves as the model's next version, unless another version was saved while measuring. */
async function saveToServer(client: ApiClient, id: string, measuredVersion: number | undefined, document: Record<string, unknown>): Promise<number> {
  const path = `/models/${encodeURIComponent(id)}`;
  const latest = await client.get<{ version: number }>(path);
  if (latest.version !== measuredVersion) {
    throw new ApiError(409, `model ${id} changed on the server while measuring (version ${measuredVersion} → ${latest.version}); nothing saved: measure again`, [{ path: 'modelId', message: 'a newer version is stored' }]);
  }
  const saved = await client.send<{ version: number }>('PUT', path, document);
  return saved.version;
}
