// What an audit screen row compares with. Pure, unit-tested.
import type { AuditWire } from '../../../app/protocol/messages.ts';

type Row = AuditWire['directions'][number];

/**
 * The earlier result of the same direction a row may show as "before", or null when there is
 * none. The report shown is merged from every stored audit (each direction's newest), so the
 * previous merged report often holds the very same audit of a direction that was not audited
 * again: that is no "before". Stored results carry the time they were audited (auditedAt); a
 * result is earlier only when it was audited before the current one. Results of this session
 * without a project carry no time: a different object is a newer run of the direction.
 */
export function earlierResult(previous: AuditWire | null, current: Row): Row | null {
  const before = previous?.directions.find((d) => d.name === current.name) ?? null;
  if (!before || before === current) return null;
  const [a, b] = [before.auditedAt, current.auditedAt];
  if (typeof a === 'string' || typeof b === 'string') return typeof a === 'string' && typeof b === 'string' && a < b ? before : null;
  return before;
}

/**
 * Each direction's "before" after a new report replaces `older`: its earlier result where the
 * new report has a newer one, else the before it already had (while it is still earlier than
 * the result shown), so an audit of other directions does not take a direction's before away.
 */
export function beforeResults(kept: Record<string, Row>, older: AuditWire | null, newer: AuditWire): Record<string, Row> {
  const out: Record<string, Row> = {};
  for (const d of newer.directions) {
    const b = earlierResult(older, d) ?? kept[d.name] ?? null;
    if (b && b !== d && earlierResult({ ...newer, directions: [b] }, d)) out[d.name] = b;
  }
  return out;
}
