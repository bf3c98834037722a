// Checks of what is typed into the app's fields, in the same limits as the engine's schemas
// (app/protocol/messages.ts), so a value the engine would refuse is stopped beside its field and
// never sent. Pure functions, unit-tested.
import { LOCATE_BUDGET, PROBE_LIMITS, SEED_MAX } from '../../../app/protocol/messages.ts';

/** Seeds per page of the workbench's seed grid. */
export const GRID_PAGE = 24;
/**
 * The largest seed the app offers: the last seed of the last grid page that lies wholly inside
 * the engine's seed range (pages start at multiples of GRID_PAGE; the page holding SEED_MAX
 * would run past it). 4,294,967,279.
 */
export const MAX_SEED = Math.floor((SEED_MAX + 1) / GRID_PAGE) * GRID_PAGE - 1;
/** First seed of the last grid page. */
export const LAST_PAGE_START = MAX_SEED + 1 - GRID_PAGE;

/** The first seed of the grid page that holds `seed`. */
export function gridPageStart(seed: number): number {
  return Math.min(LAST_PAGE_START, Math.max(0, Math.floor(seed / GRID_PAGE) * GRID_PAGE));
}

const SEED_RULE = `a whole number from 0 to ${MAX_SEED}`;

/** The message for one typed seed ("go to seed"), or null when it is a seed the app can show. Empty text is no problem (nothing to go to). */
export function seedProblem(text: string): string | null {
  const t = text.trim();
  if (t === '') return null;
  if (!/^\d+$/.test(t)) return `A seed is ${SEED_RULE}.`;
  if (Number(t) > MAX_SEED) return `Seeds go up to ${MAX_SEED}.`;
  return null;
}

/** "0-7,12" → [0..7, 12]; throws with a message naming the part that is wrong. */
export function parseSeedList(text: string): number[] {
  const out: number[] = [];
  for (const part of text.split(',').map((x) => x.trim()).filter(Boolean)) {
    const m = /^(\d+)(?:-(\d+))?$/.exec(part);
    if (!m) throw new Error(`'${part}' is not a seed or a range like 0-7`);
    const a = Number(m[1]);
    const b = m[2] === undefined ? a : Number(m[2]);
    if (b > MAX_SEED) throw new Error(`seed ${m[2] ?? m[1]} is too large: seeds go up to ${MAX_SEED}`);
    if (b < a || b - a > 10_000) throw new Error(`seed range '${part}' is backwards or too long`);
    for (let s = a; s <= b; s++) out.push(s);
  }
  if (!out.length) throw new Error('no seeds given');
  return out;
}

/** The message for a seed list like "0-7,12", or null. */
export function seedListProblem(text: string): string | null {
  try {
    parseSeedList(text);
    return null;
  } catch (err) {
    return (err as Error).message;
  }
}

/** The message for a probe count, or null when it is acceptable (same limits as the engine's schema). */
export function probesProblem(value: unknown, pinned: number): string | null {
  if (typeof value !== 'number' || !Number.isFinite(value)) return 'Enter a whole number of probes.';
  if (!Number.isInteger(value)) return 'Probes must be a whole number.';
  if (value < PROBE_LIMITS.min) return `Probes cannot be negative (0–${PROBE_LIMITS.max.toLocaleString()}).`;
  if (value > PROBE_LIMITS.max) return `At most ${PROBE_LIMITS.max.toLocaleString()} probes.`;
  if (value + pinned < PROBE_LIMITS.minTotal) return `An audit needs at least ${PROBE_LIMITS.minTotal} probes in all (random plus ${pinned} pinned seeds and references).`;
  return null;
}

/** The message for a whole number field with inclusive limits, or null. */
export function wholeProblem(value: unknown, min: number, max: number, what: string): string | null {
  if (typeof value !== 'number' || !Number.isFinite(value) || !Number.isInteger(value)) return `${what}: enter a whole number from ${min} to ${max}.`;
  if (value < min || value > max) return `${what} must be from ${min} to ${max}.`;
  return null;
}

/**
 * The message for a locate evaluation budget, or null. A number input gives a number, or null /
 * NaN / '' when what is typed is not one ("abc", "1e" half typed).
 */
export function budgetProblem(value: unknown): string | null {
  return wholeProblem(value, LOCATE_BUDGET.min, LOCATE_BUDGET.max, 'Budget')?.replace(`${LOCATE_BUDGET.min} to ${LOCATE_BUDGET.max}`, `${LOCATE_BUDGET.min.toLocaleString('en')} to ${LOCATE_BUDGET.max.toLocaleString('en')} evaluations`) ?? null;
}
