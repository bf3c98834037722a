// PlumblineError, the error every layer throws on purpose, and toErrorData, the one place that
// maps any thrown value to the protocol's error data. The codes themselves live in the protocol's
// catalogue (app/protocol/errors.ts) so the web shell, the desktop shell and the renderer see them.
import { ProtocolError } from '../protocol/messages.ts';
import type { ErrorCode, ErrorData } from '../protocol/errors.ts';
import { OutputValueError } from './image.ts';

export { ERROR_CATALOGUE, type ErrorCode, type ErrorData } from '../protocol/errors.ts';

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

/**
 * Every error class, mapped once: PlumblineError and its subclasses (PackError) carry their code;
 * a protocol violation is 'protocol'; a generator value outside its range is 'output-out-of-range' (or 'output-not-finite');
 * anything else is a bug and reaches the user as 'internal' with its message.
 */
export function toErrorData(err: unknown): ErrorData {
  if (err instanceof PlumblineError) return err.toData();
  if (err instanceof ProtocolError) return { code: 'protocol', message: err.message };
  if (err instanceof OutputValueError) return { code: err.finite ? 'output-out-of-range' : 'output-not-finite', message: err.message };
  return { code: 'internal', message: err instanceof Error ? err.message : String(err) };
}
