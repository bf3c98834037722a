// Chart data mapping: audit values to heatmap cells and curve rows with their CI bands.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { curveRows, heatmapCells, leadingAttributes, pathRows } from '../../renderer/src/lib/charts.ts';
import type { AuditWire } from '../../app/protocol/messages.ts';

const iv = (value: number, low: number, high: number) => ({ value, low, high });
const report = {
  format: 'plumbline.audit', version: 1, generator: { name: 'g', fingerprint: 'f' }, probes: { count: 64, psi: 0.7 }, warnings: [], caution: '',
  settings: { referenceStrength: 2, leakPass: 0.15, leakFail: 0.35 },
  attributes: [{ name: 'size', unit: '', source: 'card', sigma: 1 }, { name: 'backdrop', unit: '', source: 'card', sigma: 1 }, { name: 'hue', unit: '', source: 'card', sigma: 1 }],
  directions: [{
    name: 'bold', target: 'size', targetChosen: false, verdict: 'fail', reason: 'r',
    targetEffect: iv(2, 1.9, 2.1),
    dependency: { size: iv(2, 1.9, 2.1), backdrop: iv(1, 0.8, 1.2), hue: iv(0.1, 0.05, 0.15) },
    leakage: { ...iv(0.5, 0.4, 0.6), strength: 2, attribute: 'backdrop' },
    pathLength: { ...iv(1, 0.9, 1.1), distance: 'ssim' },
    safeRange: [0, 0], breaksAt: null,
    curves: { strengths: [-1, 0, 1], attributes: { size: { mean: [-1, 0, 1], low: [-1.1, 0, 0.9], high: [-0.9, 0, 1.1] }, backdrop: { mean: [-0.5, 0, 0.5], low: [-0.6, 0, 0.4], high: [-0.4, 0, 0.6] } } },
    leakageCurve: [0.5, null, 0.5],
    pathLengthCurve: { strengths: [-1, 0, 1], mean: [1, 1, 2], low: [0.9, 0.9, 1.5], high: [1.1, 1.1, 2.5] },
  }],
  combinations: [],
} as unknown as AuditWire;

test('heatmap cells carry value, interval, target flag and the value relative to the target', () => {
  const cells = heatmapCells(report);
  assert.equal(cells.length, 3);
  const backdrop = cells.find((c) => c.attribute === 'backdrop')!;
  assert.deepEqual([backdrop.value, backdrop.low, backdrop.high, backdrop.relative, backdrop.isTarget], [1, 0.8, 1.2, 0.5, false]);
  assert.match(backdrop.label, /bold → backdrop: 1\.00 σ \(95% CI 0\.80–1\.20\) · 0\.50 of the target/);
  assert.equal(cells.find((c) => c.attribute === 'size')!.isTarget, true);
});

test('curve rows pair every strength with its band', () => {
  const rows = curveRows(report, 'bold', ['backdrop']);
  assert.deepEqual(rows, [
    { attribute: 'backdrop', strength: -1, mean: -0.5, low: -0.6, high: -0.4 },
    { attribute: 'backdrop', strength: 0, mean: 0, low: 0, high: 0 },
    { attribute: 'backdrop', strength: 1, mean: 0.5, low: 0.4, high: 0.6 },
  ]);
  assert.deepEqual(leadingAttributes(report, 'bold', 1), ['size', 'backdrop']);
  assert.deepEqual(pathRows(report, 'bold').map((r) => [r.strength, r.low, r.high]), [[-1, 0.9, 1.1], [0, 0.9, 1.1], [1, 1.5, 2.5]]);
  assert.deepEqual(curveRows(report, 'missing'), []);
});
