// Name rules for things that become file names: direction names (sidecars, packs, keep, rename,
// project entries) and variant-set labels. One rule, used by every process, including the
// renderer's keep dialog, so a name accepted in one place is accepted everywhere.
//
// A direction name is exactly one path segment: letters, digits, '_', '-' and '.', not starting
// with '.' (so never '.', '..' or a hidden file) and not ending with '.' (Windows drops trailing
// dots, which would make 'crest.' and 'crest' the same file). Dots inside are fine ('crest..v2'
// is one segment like any other): the check is on segments, never on substrings.
import { z } from 'zod';

/** Longest direction name; file names stay well under every file system's 255-byte limit. */
export const DIRECTION_NAME_MAX = 120;

export const DIRECTION_NAME_PATTERN = /^[A-Za-z0-9_-](?:[A-Za-z0-9_.-]*[A-Za-z0-9_-])?$/;

/** Device names Windows reserves in every folder (with any extension), per Microsoft's file-naming rules. */
const WINDOWS_RESERVED = /^(con|prn|aux|nul|com[0-9]|lpt[0-9])(\..*)?$/i;

export const DIRECTION_NAME_RULE = "1–120 letters, digits, '_', '-' or '.', not starting or ending with '.'";

/** Why a direction name is refused, or null when it is fine. */
export function directionNameProblem(name: unknown): string | null {
  if (typeof name !== 'string' || name.length === 0) return 'is empty';
  if (name.length > DIRECTION_NAME_MAX) return `is ${name.length} characters long (at most ${DIRECTION_NAME_MAX})`;
  if (!DIRECTION_NAME_PATTERN.test(name)) return `may use only ${DIRECTION_NAME_RULE}`;
  if (WINDOWS_RESERVED.test(name)) return 'is a device name reserved on Windows';
  return null;
}

export const isDirectionName = (name: unknown): name is string => directionNameProblem(name) === null;

/** Two names that differ only in case are the same file on macOS and Windows: compare by this key. */
export const directionNameKey = (name: string): string => name.toLowerCase();

export const directionNameSchema = z.string().superRefine((s, ctx) => {
  const problem = directionNameProblem(s);
  if (problem) ctx.addIssue({ code: 'custom', message: `direction name '${s.slice(0, 60)}' ${problem}` });
});

/** A safe name derived from anything (a file's base name, say): disallowed characters become '_'. */
export function toDirectionName(raw: string): string {
  let s = raw.replace(/[^A-Za-z0-9_.-]/g, '_').replace(/^\.+/, '').replace(/\.+$/, '').slice(0, DIRECTION_NAME_MAX);
  if (!s) s = 'direction';
  if (WINDOWS_RESERVED.test(s)) s = `${s}_`;
  return s.replace(/\.+$/, '');
}

/** Variant-set labels name sub-folders of the output folder: one segment, same rule as names plus '=' and '+'. */
export const VARIANT_LABEL_PATTERN = /^[A-Za-z0-9_=+-](?:[A-Za-z0-9_.=+-]{0,58}[A-Za-z0-9_=+-])?$/;
export const variantLabelSchema = z.string().regex(VARIANT_LABEL_PATTERN, "1–60 letters, digits, '_', '.', '=', '+' or '-', not starting or ending with '.'");
