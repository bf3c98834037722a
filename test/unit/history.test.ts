// Undo/redo semantics users of creative tools expect (common practice: a new action after an
// undo discards the redo branch).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { History } from '../../renderer/src/lib/history.ts';

test('undo and redo walk the stack; pushing after undo clears redo', () => {
  const h = new History<number>();
  h.push('a', 0, 1);
  h.push('b', 1, 2);
  assert.equal(h.undo()?.before, 1);
  assert.equal(h.undo()?.before, 0);
  assert.equal(h.undo(), null);
  assert.equal(h.redo()?.after, 1);
  h.push('c', 1, 5);
  assert.equal(h.canRedo, false);
  assert.equal(h.undoLabel, 'c');
});

test('the stack keeps at most its limit of entries', () => {
  const h = new History<number>(3);
  for (let i = 0; i < 10; i++) h.push(`s${i}`, i, i + 1);
  let n = 0;
  while (h.undo()) n++;
  assert.equal(n, 3);
});
