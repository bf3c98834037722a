// Parsing a JSON document against a schema, with the error every file format here reports:
// the file, whether it was JSON at all, and the first problems with their paths. Size and
// nesting are capped before parsing: a 200,000-deep object parses, but every recursive step
// after it (validation, copying, saving) would overflow the stack half-way through.
import type { z } from 'zod';
import { PlumblineError, type ErrorCode } from './errors.ts';

/** Caps for JSON documents: no format here nests deeper than about 8 levels or needs megabytes. */
export const JSON_LIMITS = { depth: 64, chars: 32 * 1024 * 1024 };

/** Deepest nesting of objects and arrays, counted without recursion (strings skipped). */
export function jsonDepth(text: string): number {
  let depth = 0;
  let max = 0;
  let inString = false;
  for (let i = 0; i < text.length; i++) {
    const c = text.charCodeAt(i);
    if (inString) {
      if (c === 92) i++; // backslash: skip the escaped character
      else if (c === 34) inString = false;
    } else if (c === 34) inString = true;
    else if (c === 123 || c === 91) {
      if (++depth > max) max = depth;
    } else if (c === 125 || c === 93) depth--;
  }
  return max;
}

export function parseJsonFile<S extends z.ZodType>(schema: S, text: string, file: string, what: string, code: ErrorCode = 'card-invalid'): z.infer<S> {
  if (text.length > JSON_LIMITS.chars) throw new PlumblineError('limit-exceeded', `${file}: ${text.length} characters of JSON, more than the ${JSON_LIMITS.chars} allowed`, { file });
  const depth = jsonDepth(text);
  if (depth > JSON_LIMITS.depth) throw new PlumblineError('limit-exceeded', `${file}: JSON nested ${depth} levels deep, more than the ${JSON_LIMITS.depth} allowed`, { file });
  let raw: unknown;
  try {
    raw = JSON.parse(text);
  } catch (err) {
    // V8's message quotes the text around the error; name only the position (never echo content).
    const at = /position (\d+)/.exec((err as Error).message)?.[1];
    throw new PlumblineError(code, `${file}: not valid JSON${at ? ` (at character ${at})` : ''}`, { file });
  }
  const r = schema.safeParse(raw);
  if (!r.success) {
    const problems = r.error.issues.slice(0, 5).map((i) => `${i.path.join('.') || '(top level)'}: ${i.message}`).join('; ');
    throw new PlumblineError(code, `${file}: ${what} — ${problems}`, { file });
  }
  return r.data;
}
