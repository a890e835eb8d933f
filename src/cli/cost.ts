import { relative, resolve } from 'node:path';
import { readDocumentFile, withoutFile } from '../document-files/index.js';
import { acceleratorCost } from '../physics/accelerator.js';
import { analyzeNetwork } from '../physics/network-cost.js';
import { BYTES_PER_ELEMENT, InputError, precisionSchema } from '../schema/index.js';
import type { DocumentKind, Precision } from '../schema/index.js';
import { guard, optionalNumber, parseFlags, printJson, UsageError } from './args.js';
import { costFigures } from './cost-figures.js';
import { EXIT_OK } from './io.js';
import type { CliIo } from './io.js';
import { num, table } from './text.js';

export const usage = `usage: ocellus cost <network.json> [--device-class FILE [--weight-buffer-kib N] [--activation-buffer-kib N]] [--precision int8|fp16] [--json]
  Multiply-accumulates, parameters and peak activation memory of a network (convolution and fully connected
  layers counted, as in Howard et al. 2017). With a device class, also the roofline latency and energy of one
  inference; the SRAM is split half and half between weight and activation buffers unless the flags say otherwise.
  --precision sets the bytes per activation without a device class (default int8).
  JSON keys: macs, params, batch_norm_params (not in params), peak_activation_bytes,
             layers[{id, op, out_shape[c,h,w], macs, params, weight_bytes, input_bytes, output_bytes}];
             with a device class also latency_ms, energy_mj, dram_bytes, compute_bound_layers
`;

async function readKind<K extends DocumentKind>(io: CliIo, file: string, kind: K) {
  const shown = relative(io.cwd, resolve(io.cwd, file)) || file;
  const result = await readDocumentFile(resolve(io.cwd, file), kind);
  if (!result.ok) {
    const issues = result.issues.map(withoutFile);
    throw new InputError(`${shown} is not a usable ${kind} document`, issues, shown);
  }
  return { ...result.document, file: shown };
}

export async function run(args: string[], io: CliIo): Promise<number> {
  return guard(io, usage, async () => {
    const { values, positionals } = parseFlags(
      args,
      {
        'device-class': { type: 'string' },
        'weight-buffer-kib': { type: 'string' },
        'activation-buffer-kib': { type: 'string' },
        precision: { type: 'string' },
        json: { type: 'boolean' },
        help: { type: 'boolean' },
      },
      true,
    );
    if (values.help) return io.stdout(usage), EXIT_OK;
    if (positionals.length !== 1) throw new UsageError('give exactly one network file');
    if (values['device-class'] === undefined && (values['weight-buffer-kib'] !== undefined || values['activation-buffer-kib'] !== undefined)) {
      throw new UsageError('--weight-buffer-kib and --activation-buffer-kib need --device-class');
    }
    let precision: Precision = 'int8';
    if (values.precision !== undefined) {
      const p = precisionSchema.safeParse(values.precision);
      if (!p.success) throw new UsageError(`--precision must be int8 or fp16, got '${values.precision}'`);
      precision = p.data;
    }
    const networkDoc = await readKind(io, positionals[0]!, 'network');
    if (networkDoc.kind !== 'network') throw new UsageError('not a network');
    const network = networkDoc.value;
    let analysis;
    try {
      analysis = analyzeNetwork(network);
    } catch (e) {
      // Name the file as well as the layer.
      if (e instanceof InputError) throw new InputError(`${networkDoc.file} cannot be costed`, e.issues, networkDoc.file);
      throw e;
    }

    const deviceDoc = values['device-class'] === undefined ? undefined : await readKind(io, values['device-class'], 'device-class');
    const deviceClass = deviceDoc?.kind === 'device-class' ? deviceDoc.value : undefined;
    if (deviceClass) {
      if (values.precision !== undefined && precision !== deviceClass.accelerator.precision) {
        throw new UsageError(`--precision ${precision} disagrees with the device class's accelerator (${deviceClass.accelerator.precision})`);
      }
      precision = deviceClass.accelerator.precision;
    }

    const result: Record<string, unknown> = costFigures(analysis, precision);
    let costRows: [string, string][] = [];
    if (deviceClass) {
      const sramKib = deviceClass.accelerator.sramKib;
      const activationBufferKib = optionalNumber(values, 'activation-buffer-kib', sramKib / 2, { positive: false });
      const weightBufferKib = optionalNumber(values, 'weight-buffer-kib', sramKib - activationBufferKib, { positive: false });
      if (activationBufferKib < 0) throw new UsageError(`--activation-buffer-kib must be 0 or more, got ${activationBufferKib}`);
      if (weightBufferKib < 0) throw new UsageError(`--weight-buffer-kib must be 0 or more, got ${weightBufferKib}`);
      if (weightBufferKib + activationBufferKib > sramKib) {
        throw new UsageError(`--weight-buffer-kib + --activation-buffer-kib = ${weightBufferKib + activationBufferKib} KiB exceed the ${sramKib} KiB SRAM of device class ${deviceClass.id}`);
      }
      const cost = acceleratorCost(analysis, deviceClass.accelerator, { weightBufferKib, activationBufferKib });
      Object.assign(result, {
        latency_ms: cost.latencyMs,
        energy_mj: cost.energyMj,
        dram_bytes: cost.dramBytes,
        compute_bound_layers: cost.computeBoundLayers,
      });
      costRows = [
        [`on ${deviceClass.id}`, `${num(weightBufferKib)} KiB weight + ${num(activationBufferKib)} KiB activation buffers`],
        ['latency', `${num(cost.latencyMs)} ms`],
        ['energy', `${num(cost.energyMj)} mJ`],
        ['DRAM traffic', `${num(cost.dramBytes)} bytes`],
        ['compute-bound layers', `${String(cost.computeBoundLayers)} of ${analysis.layers.length}`],
      ];
    }
    if (values.json) return printJson(io, result), EXIT_OK;
    io.stdout(
      table([
        ['network', `${network.id} (${network.name})`],
        ['multiply-accumulates', num(analysis.macs, 6)],
        ['parameters', num(analysis.params, 6)],
        ['peak activations', `${num(analysis.peakActivationElements * BYTES_PER_ELEMENT[precision], 6)} bytes (${precision})`],
        ...costRows,
      ]),
    );
    const width = Math.max(...analysis.layers.map((l) => l.id.length), 5);
    io.stdout(`\n${'layer'.padEnd(width)}  op       out (c×h×w)        MACs          params\n`);
    for (const l of analysis.layers) {
      io.stdout(`${l.id.padEnd(width)}  ${l.op.padEnd(7)}  ${l.outShape.join('×').padEnd(17)}  ${String(l.macs).padStart(12)}  ${String(l.params).padStart(10)}\n`);
    }
    return EXIT_OK;
  });
}
