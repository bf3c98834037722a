// One catalogue of error codes. Errors cross process boundaries as plain data
// ({ code, message, file? }); the message says what was expected and what arrived.

export const ERROR_CODES = {
  'not-onnx': 'The file is not an ONNX model',
  'onnx-truncated': 'The ONNX file ends early',
  'no-latent-input': 'The generator has no float latent input',
  'bad-image-output': 'The generator image output has the wrong shape',
  'output-out-of-range': 'Generator output is far outside its declared range',
  'output-not-finite': 'Generator output contains NaN or Inf',
  'latent-size-mismatch': 'Latent sizes disagree',
  'card-invalid': 'The model card is invalid',
  'file-missing': 'A file could not be read',
  'npy-invalid': 'The .npy file is invalid',
  'npy-shape': 'Array shape mismatch',
  'directions-invalid': 'The directions metadata is invalid',
  'protocol': 'A message broke the protocol',
  'no-model': 'No generator is loaded',
  'bad-request': 'The request is invalid',
  'engine-stopped': 'The engine stopped',
  'cancelled': 'Cancelled',
  'write-failed': 'A file could not be written',
  'farm': 'The render farm refused or failed the work',
  'internal': 'Internal error',
} as const;

export type ErrorCode = keyof typeof ERROR_CODES;

export interface ErrorData {
  code: ErrorCode;
  message: string;
  file?: string;
}

export class PlumblineError extends Error {
  readonly code: ErrorCode;
  readonly file?: string;
  constructor(code: ErrorCode, message: string, extra: { file?: string; cause?: unknown } = {}) {
    super(message, extra.cause === undefined ? undefined : { cause: extra.cause });
    this.name = 'PlumblineError';
    this.code = code;
    this.file = extra.file;
  }
  toData(): ErrorData {
    return { code: this.code, message: this.message, ...(this.file ? { file: this.file } : {}) };
  }
}

export function toErrorData(err: unknown): ErrorData {
  if (err instanceof PlumblineError) return err.toData();
  const message = err instanceof Error ? err.message : String(err);
  return { code: 'internal', message };
}
