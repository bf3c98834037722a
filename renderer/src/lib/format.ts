// Dates and numbers for people: in the user's own locale (the browser's or the desktop's), never
// in a fixed English format.

/** A date and time in the user's locale, e.g. "2 Dec 2026, 10:41" or "02.12.2026, 10:41". */
export function formatDate(iso: string): string {
  const d = new Date(iso);
  if (Number.isNaN(d.getTime())) return iso;
  return new Intl.DateTimeFormat(undefined, { dateStyle: 'medium', timeStyle: 'short' }).format(d);
}

export function formatTime(iso: string | number): string {
  const d = new Date(iso);
  return Number.isNaN(d.getTime()) ? String(iso) : new Intl.DateTimeFormat(undefined, { timeStyle: 'medium' }).format(d);
}

/** A whole-number rank as words read it: 81 → "81st", 63 → "63rd", 12 → "12th". */
export function ordinal(v: number): string {
  const n = Math.round(v);
  const teen = n % 100 >= 11 && n % 100 <= 13;
  return `${n}${teen ? 'th' : (['th', 'st', 'nd', 'rd'][n % 10] ?? 'th')}`;
}

/**
 * A direction's leakage as the verdict rows say it: "0.31 σ [0.22–0.40] into backdrop". When the
 * leak and its upper bound are both zero, nothing leaked beyond the instrument, and naming the
 * attribute that happened to come first would suggest a leak that is not there.
 */
export function leakPhrase(l: { value?: number | null; low?: number | null; high?: number | null; attribute: string }, digits = 2): string {
  const f = (v: number | null | undefined) => (typeof v === 'number' ? v.toFixed(digits) : '—');
  if (l.value === 0 && l.high === 0) return `${f(0)} σ (no leak beyond the instrument)`;
  return `${f(l.value)} σ [${f(l.low)}–${f(l.high)}] into ${l.attribute}`;
}
