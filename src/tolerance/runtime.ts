/** The model's weights on onnxruntime's CPU execution provider, one thread, one image at a time. */
import ort from 'onnxruntime-node';
import { InputError } from '../schema/issues.js';

export interface ModelOutput {
  data: Float32Array;
  dims: readonly number[];
}

export interface ModelRunner {
  inputName: string;
  run(tensor: Float32Array, dims: readonly number[]): Promise<ModelOutput>;
  close(): Promise<void>;
}

export async function openModel(file: string, shown: string): Promise<ModelRunner> {
  let session: ort.InferenceSession;
  try {
    session = await ort.InferenceSession.create(file, { executionProviders: ['cpu'], intraOpNumThreads: 1, interOpNumThreads: 1, graphOptimizationLevel: 'all' });
  } catch (e) {
    const reason = (e as Error).message;
    throw new InputError(`${shown} cannot be loaded by onnxruntime: ${reason}`, [{ path: '(file)', message: reason }], shown);
  }
  const inputName = session.inputNames[0]!;
  const outputName = session.outputNames[0]!;
  return {
    inputName,
    async run(tensor, dims) {
      const out = await session.run({ [inputName]: new ort.Tensor('float32', tensor, dims) });
      const t = out[outputName]!;
      return { data: t.data as Float32Array, dims: t.dims };
    },
    close: () => session.release(),
  };
}
