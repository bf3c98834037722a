// What a row of the audit and sign-off screens offers: a "before" only where there is an earlier
// audit of that direction, and Rename only where the engine will allow it.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { beforeResults, earlierResult } from '../../renderer/src/lib/audit-rows.ts';
import { renameRefusal } from '../../renderer/src/lib/direction-rules.ts';
import type { AuditWire, DirectionInfo } from '../../app/protocol/messages.ts';

const row = (name: string, leak: number, auditedAt?: string) => ({ name, verdict: 'pass', leakage: { value: leak }, ...(auditedAt ? { auditedAt } : {}) }) as unknown as AuditWire['directions'][number];
const report = (...directions: AuditWire['directions']) => ({ directions }) as unknown as AuditWire;

test('a direction audited once has no before, even when the merged history is loaded again', () => {
  // Loading the history twice gives equal but distinct objects of the same stored audit.
  const first = report(row('turn', 0, '2026-01-02T10:00:00Z'));
  const again = report(row('turn', 0, '2026-01-02T10:00:00Z'), row('bold', 0.4, '2026-01-02T11:00:00Z'));
  assert.equal(earlierResult(first, again.directions[0]), null);
  assert.equal(earlierResult(first, again.directions[1]), null);
  assert.deepEqual(beforeResults({}, first, again), {});
  assert.equal(earlierResult(null, again.directions[0]), null);
});

test('a direction audited again shows its earlier result, and keeps it through audits of others', () => {
  const one = report(row('bold', 0.6, '2026-01-02T10:00:00Z'));
  const two = report(row('bold', 0.1, '2026-01-03T10:00:00Z'));
  assert.equal(earlierResult(one, two.directions[0]), one.directions[0]);
  const before = beforeResults({}, one, two);
  assert.equal(before.bold, one.directions[0]);
  const three = report(row('bold', 0.1, '2026-01-03T10:00:00Z'), row('turn', 0, '2026-01-04T10:00:00Z'));
  assert.equal(beforeResults(before, two, three).bold, one.directions[0]);
  assert.equal(beforeResults(before, two, three).turn, undefined);
});

test('without a project (no audit times) the same object is no before, a newer run is', () => {
  const a = row('turn', 0.2);
  const older = report(a);
  assert.equal(earlierResult(older, a), null);
  const b = row('turn', 0.1);
  assert.equal(earlierResult(older, b), a);
});

const dir = (history: number, audits: number) => ({
  id: 'd1', name: 'turn', signOff: { status: 'draft', approvalReset: false, history: Array.from({ length: history }, () => ({})), audits: Array.from({ length: audits }, () => ({})) },
}) as unknown as DirectionInfo;

test('rename is offered only where the engine allows it, with the reason where it does not', () => {
  assert.equal(renameRefusal(dir(0, 0)), null);
  assert.equal(renameRefusal({ id: 'x', name: 'new_one', signOff: null } as unknown as DirectionInfo), null);
  assert.equal(renameRefusal(dir(1, 0)), 'Cannot rename turn: it has 1 sign-off step on record, kept under its name.');
  assert.equal(renameRefusal(dir(0, 2)), 'Cannot rename turn: it has 2 audits on record, kept under its name.');
  assert.match(renameRefusal(dir(2, 1))!, /2 sign-off steps and 1 audit/);
});
