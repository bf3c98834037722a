// Parsing a JSON document against a schema, with the error every file format here reports:
// the file, whether it was JSON at all, and the first problems with their paths.
import type { z } from 'zod';
import { PlumblineError, type ErrorCode } from './errors.ts';

export function parseJsonFile<S extends z.ZodType>(schema: S, text: string, file: string, what: string, code: ErrorCode = 'card-invalid'): z.infer<S> {
  let raw: unknown;
  try {
    raw = JSON.parse(text);
  } catch (err) {
    throw new PlumblineError(code, `${file}: not valid JSON (${(err as Error).message})`, { file });
  }
  const r = schema.safeParse(raw);
  if (!r.success) {
    const problems = r.error.issues.slice(0, 5).map((i) => `${i.path.join('.') || '(top level)'}: ${i.message}`).join('; ');
    throw new PlumblineError(code, `${file}: ${what} — ${problems}`, { file });
  }
  return r.data;
}
