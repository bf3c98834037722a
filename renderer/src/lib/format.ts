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
