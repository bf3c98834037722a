// The one catalogue of error codes, shared by the engine, the CLI, the web shell, the Electron
// shell and the renderer. Errors cross every boundary as plain data ({ code, message, file? });
// the message says what was expected and what arrived, naming the file. `input` marks errors the
// user can fix by giving other input (the CLI exits with code 2 for them, 1 otherwise).
// Cancellation is not an error: a cancelled job answers with the cancelled result (messages.ts).
import { z } from 'zod';

export const ERROR_CATALOGUE = {
  'not-onnx': { title: 'The file is not an ONNX model', input: true },
  'onnx-truncated': { title: 'The ONNX file ends early', input: true },
  'no-latent-input': { title: 'The generator has no float latent input', input: true },
  'bad-image-output': { title: 'The generator image output has the wrong shape', input: true },
  'output-out-of-range': { title: 'Generator output is far outside its declared range', input: true },
  'output-not-finite': { title: 'Generator output contains NaN or Inf', input: true },
  'latent-size-mismatch': { title: 'Latent sizes disagree', input: true },
  'card-invalid': { title: 'The model card is invalid', input: true },
  'file-missing': { title: 'A file could not be read', input: true },
  'npy-invalid': { title: 'The .npy file is invalid', input: true },
  'npy-shape': { title: 'Array shape mismatch', input: true },
  'directions-invalid': { title: 'The directions metadata is invalid', input: true },
  'image-invalid': { title: 'The image file cannot be read', input: true },
  'image-too-large': { title: 'The image file is over a size cap', input: true },
  'bad-request': { title: 'The request is invalid', input: true },
  'path-refused': { title: 'A path leads outside the folder it must stay in', input: true },
  'not-a-file': { title: 'Not a regular file where a file is expected', input: true },
  'use-refused': { title: 'A sign-off rule refuses this use of a direction (it may be forced with a written reason)', input: true },
  'would-overwrite': { title: 'A file exists that nobody chose to replace', input: true },
  'limit-exceeded': { title: 'A file or model exceeds a resource cap', input: true },
  'pack-unreadable': { title: 'unreadable pack', input: true },
  'pack-unsafe': { title: 'unsafe pack refused', input: true },
  'pack-tampered': { title: 'tampered or corrupted pack', input: true },
  'pack-version': { title: 'unsupported pack version', input: true },
  'pack-wrong-generator': { title: 'wrong generator', input: true },
  'pack-invalid-direction': { title: 'invalid direction in pack', input: true },
  'pack-incomplete': { title: 'incomplete pack', input: true },
  'pack-signature': { title: 'signature check failed', input: true },
  'no-model': { title: 'No generator is loaded', input: false },
  'protocol': { title: 'A message broke the protocol', input: false },
  'engine-stopped': { title: 'The engine stopped', input: false },
  'write-failed': { title: 'A file could not be written', input: false },
  'farm': { title: 'The render farm refused or failed the work', input: false },
  'internal': { title: 'Internal error', input: false },
} as const satisfies Record<string, { title: string; input: boolean }>;

export type ErrorCode = keyof typeof ERROR_CATALOGUE;
export const ERROR_CODES = Object.keys(ERROR_CATALOGUE) as [ErrorCode, ...ErrorCode[]];

export const errorDataSchema = z.object({
  code: z.enum(ERROR_CODES),
  message: z.string(),
  file: z.string().optional(),
});
export type ErrorData = z.infer<typeof errorDataSchema>;
