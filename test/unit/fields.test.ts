// Field checks of the app: what the screens stop beside a field must be exactly what the engine's
// schemas would refuse, so nothing the engine refuses is ever sent.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { budgetProblem, GRID_PAGE, gridPageStart, LAST_PAGE_START, MAX_SEED, parseSeedList, seedListProblem, seedProblem } from '../../renderer/src/lib/fields.ts';
import { methods, SEED_MAX } from '../../app/protocol/messages.ts';

test('the largest seed is the last one of the last grid page the engine accepts whole', () => {
  assert.equal(MAX_SEED, 4294967279);
  assert.equal(LAST_PAGE_START % GRID_PAGE, 0);
  const seeds = Array.from({ length: GRID_PAGE }, (_, i) => gridPageStart(MAX_SEED) + i);
  assert.equal(seeds.at(-1), MAX_SEED);
  assert.ok(methods['grid.render'].params.safeParse({ seeds, psi: 0.7 }).success);
  // One page further runs past the engine's seed range.
  assert.ok(!methods['grid.render'].params.safeParse({ seeds: seeds.map((s) => s + GRID_PAGE), psi: 0.7 }).success);
  assert.ok(MAX_SEED + GRID_PAGE > SEED_MAX);
  assert.equal(gridPageStart(SEED_MAX), LAST_PAGE_START);
  assert.equal(gridPageStart(30), 24);
});

test('go to seed: whole numbers from 0 to the largest seed, everything else named', () => {
  for (const ok of ['', '0', '17', ' 5 ', String(MAX_SEED)]) assert.equal(seedProblem(ok), null, ok);
  for (const bad of ['abc', '-1', '12.5', '1e3', '4294967295', '4294967296', String(MAX_SEED + 1)]) {
    assert.ok(seedProblem(bad), bad);
  }
  assert.match(seedProblem('abc')!, /whole number from 0 to 4294967279/);
  assert.match(seedProblem('4294967296')!, /up to 4294967279/);
});

test('seed lists stop at the same largest seed, so variants.render never gets a seed it refuses', () => {
  assert.deepEqual(parseSeedList('0-3, 9'), [0, 1, 2, 3, 9]);
  assert.deepEqual(parseSeedList(String(MAX_SEED)), [MAX_SEED]);
  assert.match(seedListProblem('4294967296')!, /too large: seeds go up to 4294967279/);
  assert.match(seedListProblem(`${MAX_SEED - 1}-${MAX_SEED + 2}`)!, /too large/);
  assert.match(seedListProblem('0-x')!, /'0-x' is not a seed or a range like 0-7/);
  const params = (seeds: number[]) => ({ name: 'v', seeds, psi: 0.7, settings: [{ label: 'base', strengths: {} }], out: '/tmp/x' });
  assert.ok(methods['variants.render'].params.safeParse(params(parseSeedList(String(MAX_SEED)))).success);
});

test('locate budget: the engine schema range, whole numbers only', () => {
  for (const ok of [50, 3000, 1_000_000]) assert.equal(budgetProblem(ok), null, String(ok));
  for (const bad of [-5, 0, 49, 12.5, 1e9, NaN, null, '', 'abc', undefined]) assert.ok(budgetProblem(bad), String(bad));
  assert.equal(budgetProblem(49), 'Budget must be from 50 to 1,000,000 evaluations.');
  assert.equal(budgetProblem(null), 'Budget: enter a whole number from 50 to 1,000,000 evaluations.');
  // Whatever passes the check passes the engine's schema.
  const schema = methods['locate.run'].params;
  for (const b of [50, 1_000_000]) assert.ok(schema.safeParse({ image: new Uint8Array(1), fileName: 'a.png', budget: b }).success);
  for (const b of [49, 1_000_001]) assert.ok(!schema.safeParse({ image: new Uint8Array(1), fileName: 'a.png', budget: b }).success);
});
