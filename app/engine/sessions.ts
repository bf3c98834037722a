// onnxruntime session creation with the engine's CPU settings. One place for thread counts,
// logging and the translation of runtime load errors into our error catalogue.
import * as ort from 'onnxruntime-node';
import { availableParallelism } from 'node:os';
import { PlumblineError } from '../core/errors.ts';

export interface SessionOptions {
  /** Intra-op threads; default: all cores but one (at least 1), leaving one for the interface. */
  threads?: number;
}

export function defaultThreads(): number {
  return Math.max(1, availableParallelism() - 1);
}

export async function createSession(bytes: Uint8Array, file: string, options: SessionOptions): Promise<ort.InferenceSession> {
  try {
    return await ort.InferenceSession.create(bytes, {
      executionProviders: ['cpu'],
      intraOpNumThreads: options.threads ?? defaultThreads(),
      interOpNumThreads: 1,
      executionMode: 'sequential',
      graphOptimizationLevel: 'all',
      logSeverityLevel: 3,
    });
  } catch (err) {
    throw new PlumblineError('not-onnx', `${file}: onnxruntime could not load the model: ${(err as Error).message}`, { file, cause: err });
  }
}
