// Colour science against outside references:
//  - CIEDE2000: the 34 published test pairs of Sharma, Wu & Dalal (2005), tolerance 1e-4 (their
//    4-decimal table), and colorjs.io 0.7.1's deltaE2000 on the same Lab inputs;
//  - sRGB → CIELAB (D65): colorjs.io's 'lab-d65' space (colorjs' own 'lab' is D50, CSS Color 4,
//    so it is deliberately not the comparison), and the check table of METHODS §5.1.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import Color from 'colorjs.io';
import { ciede2000, srgb8ToLab, srgbDecode, type Lab } from '../../app/core/color.ts';
import { Random } from '../../app/core/random.ts';

const sharma = JSON.parse(readFileSync(new URL('../fixtures/ciede2000-sharma-2005.json', import.meta.url), 'utf8')) as { pairs: { lab1: Lab; lab2: Lab; deltaE00: number }[] };

test('CIEDE2000 reproduces all 34 Sharma et al. (2005) pairs to 1e-4, in both argument orders', () => {
  assert.equal(sharma.pairs.length, 34);
  sharma.pairs.forEach((p, i) => {
    const d = ciede2000(p.lab1, p.lab2);
    assert.ok(Math.abs(d - p.deltaE00) < 1e-4 + 5e-5, `pair ${i + 1}: ${d} vs ${p.deltaE00}`);
    assert.ok(Math.abs(ciede2000(p.lab2, p.lab1) - d) < 1e-9, `pair ${i + 1} symmetric`);
  });
});

test('CIEDE2000 agrees with colorjs.io on the Sharma pairs and on random Lab pairs', () => {
  const rng = new Random(11);
  const pairs: [Lab, Lab][] = sharma.pairs.map((p) => [p.lab1, p.lab2]);
  for (let i = 0; i < 200; i++) {
    const lab = (): Lab => [rng.uniform() * 100, rng.uniform() * 160 - 80, rng.uniform() * 160 - 80];
    pairs.push([lab(), lab()]);
  }
  for (const [a, b] of pairs) {
    const ref = new Color('lab', a).deltaE2000(new Color('lab', b));
    assert.ok(Math.abs(ciede2000(a, b) - ref) < 1e-6, `${a} vs ${b}: ${ciede2000(a, b)} vs colorjs ${ref}`);
  }
});

test('sRGB decoding follows IEC 61966-2-1 (code 10 on the linear segment)', () => {
  // Values computed from the IEC formula (METHODS §5.1): lin(10) = 0.003035, lin(11) = 0.003347, lin(128) = 0.215861.
  assert.ok(Math.abs(srgbDecode(10 / 255) - 0.003035) < 1e-6);
  assert.ok(Math.abs(srgbDecode(11 / 255) - 0.003347) < 1e-6);
  assert.ok(Math.abs(srgbDecode(128 / 255) - 0.215861) < 1e-6);
});

test('sRGB → CIELAB (D65) matches colorjs.io lab-d65 and the METHODS §5.1 table', () => {
  const table: [number[], number[]][] = [
    [[255, 255, 255], [100, 0, 0]],
    [[255, 0, 0], [53.2371, 80.0901, 67.2033]],
    [[0, 255, 0], [87.7355, -86.1816, 83.1866]],
    [[0, 0, 255], [32.3009, 79.1953, -107.8555]],
    [[200, 120, 40], [57.9107, 25.2911, 54.0829]],
  ];
  for (const [rgb, lab] of table) {
    const got = srgb8ToLab(rgb[0], rgb[1], rgb[2]);
    got.forEach((v, k) => assert.ok(Math.abs(v - lab[k]) < 0.02, `${rgb} → ${got} vs ${lab}`));
  }
  assert.ok(Math.abs(srgb8ToLab(119, 119, 119)[0] - 50.0344) < 0.001);
  const rng = new Random(5);
  for (let i = 0; i < 300; i++) {
    const rgb = [rng.int(256), rng.int(256), rng.int(256)];
    const ref = new Color('srgb', rgb.map((v) => v / 255) as [number, number, number]).to('lab-d65').coords as number[];
    const got = srgb8ToLab(rgb[0], rgb[1], rgb[2]);
    got.forEach((v, k) => assert.ok(Math.abs(v - ref[k]) < 2e-3, `${rgb}: ${got} vs colorjs ${ref}`));
  }
});
