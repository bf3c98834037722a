// Model-card validation: the bundled card passes; broken cards say what is wrong and where.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { parseModelCard } from '../../app/core/model-card.ts';

const demo = readFileSync(new URL('../../resources/demo/sigil.card.json', import.meta.url), 'utf8');

test('the demo card is valid and declares W+ with 3 layers and 13 attributes', () => {
  const card = parseModelCard(demo, 'sigil.card.json');
  assert.equal(card.synthesis.space, 'w+');
  assert.equal(card.synthesis.layers, 3);
  assert.equal(card.attributes.length, 13);
  assert.equal(card.truncation.centre?.length, card.synthesis.latentSize);
});

test('invalid cards are refused with the file name and the field', () => {
  const base = JSON.parse(demo);
  const broken: [string, (c: any) => void, RegExp][] = [
    ['no synthesis', (c) => delete c.synthesis, /synthesis/],
    ['range backwards', (c) => (c.synthesis.range = [1, -1]), /range/],
    ['centre length', (c) => (c.truncation.centre = [0, 1]), /truncation.centre: has 2 values, latentSize is 32/],
    ['duplicate attribute', (c) => c.attributes.push({ name: 'size' }), /listed twice/],
    ['w+ with 1 layer', (c) => (c.synthesis.layers = 1), /layers/],
    ['wrong format', (c) => (c.format = 'other'), /format/],
  ];
  for (const [name, mutate, pattern] of broken) {
    const c = structuredClone(base);
    mutate(c);
    assert.throws(() => parseModelCard(JSON.stringify(c), 'my.card.json'), (e: Error) => /my\.card\.json/.test(e.message) && pattern.test(e.message), name);
  }
  assert.throws(() => parseModelCard('{ nope', 'x.json'), /x\.json: not valid JSON/);
});
