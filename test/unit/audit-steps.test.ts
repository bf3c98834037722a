// The audit's pure steps, each on its own: plan, statistics, verdict and report. The statistics
// of a synthetic direction (known per-probe changes and path lengths) are checked against NumPy
// and SciPy computing the same published definitions independently (/usr/bin/python3):
// leakage = max over other attributes of mean|Δ_other|/σ at ±reference (attribute dependency,
// Wu et al. 2021; shared/METHODS.md §3.1), its ratio to mean|Δ_target|/σ as a readout, the
// normal-approximation interval
// of a mean (mean ± z₀.₉₇₅·s/√n, ddof = 1; common practice), and path length as the mean over
// probes of the finite-difference distance (METHODS §1.5). PNG thumbnails are checked against the
// PNG signature (ISO/IEC 15948 §5.2) and decoded with fast-png, an outside library.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { decodeRgba } from '../helpers/png.ts';
import { planAudit, auditWorkUnits } from '../../app/core/audit/plan.ts';
import { directionStatistics, type DirectionMeasurements } from '../../app/core/audit/statistics.ts';
import { judgeDirection } from '../../app/core/audit/verdict.ts';
import { assembleReport, auditReportFile, auditReportWire, directionReport } from '../../app/core/audit/report.ts';
import { ProbeBootstrap } from '../../app/core/stats.ts';
import { encodePng } from '../../app/core/image.ts';

const PYTHON = '/usr/bin/python3';
const probe = existsSync(PYTHON) ? spawnSync(PYTHON, ['-c', 'import numpy, scipy; print(numpy.__version__)'], { encoding: 'utf8' }) : null;
const skipPython = probe?.status === 0 ? false : `${PYTHON} with numpy and scipy is not available here`;

const unit = (name: string, target: string | null = null) => ({ name, target, layers: null, vector: Float32Array.from([1, 0, 0, 0]), sigma: 1 });

test('the plan fixes seeds, grid and pairs and rejects impossible settings', () => {
  const plan = planAudit({ probes: 5, pinnedSeeds: [7, 9], strengths: [2, -2, 1], combinations: 'all' }, [unit('a'), unit('b'), unit('c')], { size: 4, layers: 1 }, ['x'], false);
  assert.deepEqual(plan.seeds.slice(0, 2), [7, 9], 'pinned seeds come first');
  assert.equal(plan.seeds.length, 7);
  assert.deepEqual(plan.grid, [-2, 0, 1, 2], '0 joins the grid, sorted');
  assert.deepEqual(plan.pairs, [[0, 1], [0, 2], [1, 2]]);
  assert.ok(plan.warnings.some((w) => /only 7 probes/.test(w)));
  // Progress units: σ batches + probe batches + per direction (3 scored strengths + 4 integer path-length strengths) × 2 batches; 5 per pair batch.
  assert.equal(auditWorkUnits(plan, 3, 4), Math.ceil(512 / 4) + 2 + 3 * (3 + 4) * 2 + 3 * Math.ceil(7 / 4) * 5);
  // 'all' pairs at most 12 directions: C(12, 2) = 66 pairs (binomial coefficient).
  const many = Array.from({ length: 15 }, (_, i) => unit(`d${i}`));
  assert.equal(planAudit({ probes: 2 }, many, { size: 4, layers: 1 }, ['x'], false).pairs.length, 66);
  const bad: [Parameters<typeof planAudit>, RegExp][] = [
    [[{ probes: 4, strengths: [-1, 1] }, [unit('a')], { size: 4, layers: 1 }, ['x'], false], /must contain ±2/],
    [[{ probes: 4, pathLength: { distance: 'features', epsilon: 0.01, spikeRatio: 5 } }, [unit('a')], { size: 4, layers: 1 }, ['x'], false], /features output/],
    [[{ probes: 1 }, [unit('a')], { size: 4, layers: 1 }, ['x'], false], /at least 2 probes/],
    [[{ probes: 4, attributes: ['x'] }, [unit('a', 'y')], { size: 4, layers: 1 }, ['x'], false], /targets unknown attribute 'y'/],
    [[{ probes: 4, combinations: [['a', 'z']] }, [unit('a'), unit('b')], { size: 4, layers: 1 }, ['x'], false], /combination a \+ z: unknown direction/],
    [[{ probes: 4 }, [{ ...unit('a'), vector: new Float32Array(3) }], { size: 4, layers: 2 }, ['x'], false], /has 3 values; this generator's latent size is 4/],
  ];
  for (const [args, pattern] of bad) assert.throws(() => planAudit(...args), pattern);
  // Without an explicit attribute list a target with no measure is audited, and its verdict says so (issue 9, part 6).
  assert.equal(planAudit({ probes: 4 }, [unit('a', 'y')], { size: 4, layers: 1 }, ['x'], false).seeds.length, 4);
});

/** A synthetic direction: target moves linearly, 'other' leaks a little and a lot at +3, path length spikes at +3. */
function synthetic(n: number) {
  const grid = [-3, -2, -1, 0, 1, 2, 3];
  const noise = (p: number, k: number) => Math.sin(p * 12.9898 + k * 78.233) * 0.05;
  const change = grid.map((s) => (s === 0 ? null : [
    Float64Array.from({ length: n }, (_, p) => s * (1 + noise(p, 1))),
    Float64Array.from({ length: n }, (_, p) => (s === 3 ? 0.9 : 0.04 * Math.abs(s)) + noise(p, 2)),
    Float64Array.from({ length: n }, (_, p) => 0.02 * s + noise(p, 3)),
  ]));
  const pathLength = grid.map((s) => Float64Array.from({ length: n }, (_, p) => (s === 3 ? 10 : 1) + noise(p, 4)));
  const measurements: DirectionMeasurements = { change, pathLength };
  return { grid, measurements };
}

test('statistics of a synthetic direction match NumPy/SciPy and the safe-range definition', { skip: skipPython }, () => {
  const n = 40;
  const { grid, measurements } = synthetic(n);
  const seeds = Array.from({ length: n }, (_, i) => 1000 + i);
  const plan = { grid, pathLengthGrid: grid, reference: 2, settings: { leakPass: 0.15, leakFail: 0.35, worstProbes: 2, pathLength: { spikeRatio: 5 } } };
  const stats = directionStatistics(measurements, plan, ['target', 'other', 'third'], seeds, 'target', new ProbeBootstrap(n, 400, 1));
  const py = spawnSync(PYTHON, ['-c', `
import json, sys, numpy as np
from scipy.stats import norm
d = json.load(sys.stdin)
g = d['grid']; ch = d['change']; pl = np.array(d['path'])
ref = 2
at = lambda s: np.array(ch[g.index(s)])
lk = {}
for s in (ref, -ref):
    m = np.abs(at(s)).mean(axis=1)
    lk[s] = max(m[1:])
worse = ref if lk[ref] >= lk[-ref] else -ref
ratio = lk[worse] / np.abs(at(worse)).mean(axis=1)[0]
z = norm.ppf(0.975)
curve = []
for s in g:
    if s == 0: curve.append([0, 0, 0]); continue
    x = at(s)[1]
    curve.append([x.mean(), x.mean() - z * x.std(ddof=1) / np.sqrt(len(x)), x.mean() + z * x.std(ddof=1) / np.sqrt(len(x))])
inner = [i for i, s in enumerate(g) if abs(s) <= ref]
print(json.dumps({'leakage': lk[worse], 'ratio': ratio, 'worse': worse, 'dependency': np.abs(at(worse)).mean(axis=1).tolist(),
  'targetEffect': at(ref)[0].mean(), 'pathLength': pl[inner].mean(axis=0).mean(), 'curveOther': curve,
  'curveLeak': [None if s == 0 else float(max(np.abs(at(s)).mean(axis=1)[1:])) for s in g]}))
`], { input: JSON.stringify({ grid, change: measurements.change.map((r) => r && r.map((c) => Array.from(c))), path: measurements.pathLength.map((c) => Array.from(c)) }), encoding: 'utf8' });
  assert.equal(py.status, 0, py.stderr);
  const ref = JSON.parse(py.stdout);
  const close = (a: number, b: number, what: string, tol = 1e-5) => assert.ok(Math.abs(a - b) <= tol * Math.max(1, Math.abs(b)), `${what}: ${a} vs NumPy ${b}`);
  close(stats.leakage.value, ref.leakage, 'leakage at the worse reference sign');
  close(stats.leakage.ratio!.value, ref.ratio, 'leakage ratio readout');
  assert.equal(stats.leakage.strength, ref.worse);
  assert.equal(stats.leakage.attribute, 'other');
  ['target', 'other', 'third'].forEach((a, j) => close(stats.dependency[a].value, ref.dependency[j], `dependency ${a}`));
  close(stats.targetEffect.value, ref.targetEffect, 'target effect');
  close(stats.pathLength.value, ref.pathLength, 'path length over |s| ≤ ref');
  grid.forEach((s, gi) => {
    const [mean, low, high] = ref.curveOther[gi];
    close(stats.curves.attributes.other.mean[gi], mean, `curve mean at ${s}`);
    close(stats.curves.attributes.other.low[gi], low, `curve low at ${s}`);
    close(stats.curves.attributes.other.high[gi], high, `curve high at ${s}`);
    if (ref.curveLeak[gi] !== null) close(stats.leakageCurve[gi]!, ref.curveLeak[gi], `leakage curve at ${s}`);
  });
  for (const iv of [stats.leakage, stats.targetEffect, stats.pathLength]) assert.ok(iv.low <= iv.value && iv.value <= iv.high, 'the interval brackets its estimate');
  // Worked from the definitions: the leak (σ) stays under 0.15 out to ±2 on both sides and at
  // -3 (0.12 ± 0.05); at +3 'other' leaks 0.9 σ and path length spikes ×10 (> 5 × the calm
  // median 1), so the safe range stops at +2 while -3 stays clean, and the direction breaks at +3.
  assert.deepEqual(stats.safeRange, [-3, 2]);
  assert.equal(stats.breaksAt, 3);
  assert.deepEqual(stats.spikes, [3]);
  assert.equal(stats.worstProbes.length, 2);
  assert.ok(stats.worstProbes[0].leakage >= stats.worstProbes[1].leakage, 'worst first');
});

test('the verdict says only what the statistics support', () => {
  const n = 40;
  const { grid, measurements } = synthetic(n);
  const seeds = Array.from({ length: n }, (_, i) => i);
  const base = { grid, pathLengthGrid: grid, reference: 2, settings: { leakPass: 0.15, leakFail: 0.35, worstProbes: 0, pathLength: { spikeRatio: 5 } } };
  const stats = directionStatistics(measurements, base, ['target', 'other', 'third'], seeds, 'target', new ProbeBootstrap(n, 300, 1));
  const judged = judgeDirection(stats, { reference: 2, settings: base.settings, fewProbes: false, pathLengthGrid: grid });
  // Clean at ±2 (the safe range -3…+2 covers ±2, so it is not named) but breaking at +3 ≤ ref + 1:
  // not a pass; the reason names the break and the spike (×10 over the calm median of 1).
  assert.equal(judged.verdict, 'review');
  assert.match(judged.reason, /^largest leak 0\.\d\d σ \(other, 95% CI up to 0\.\d\d\) against the target's [12]\.\d\d σ; 0 of 40 probes leak ≥ 0\.15 σ \(95% CI 0\.0%–8\.8% of probes\); breaks from \+3 \(positive side\): path length spikes ×(9\.\d|10\.\d)$/);
  const leaky = { ...stats, leakage: { ...stats.leakage, value: 0.5, low: 0.4, high: 0.6 } };
  assert.equal(judgeDirection(leaky, { reference: 2, settings: base.settings, fewProbes: false, pathLengthGrid: grid }).verdict, 'fail');
  const still = { ...stats, targetEffect: { value: 0.01, low: -0.02, high: 0.04 } };
  assert.match(judgeDirection(still, { reference: 2, settings: base.settings, fewProbes: false, pathLengthGrid: grid }).reason, /^barely moves its target target \(0\.01 σ at \+2\)/);
  const clean = { ...stats, breaksAt: null, breaks: { negative: null, positive: null }, spikes: [], safeRange: [-3, 3] as [number, number] };
  assert.equal(judgeDirection(clean, { reference: 2, settings: base.settings, fewProbes: false, pathLengthGrid: grid }).verdict, 'pass');
  const few = judgeDirection(clean, { reference: 2, settings: base.settings, fewProbes: true, pathLengthGrid: grid });
  assert.equal(few.verdict, 'review');
  assert.match(few.reason, /too few probes to pass \(a pass needs at least 30, as does approval\)$/);
});

test('the report keeps thumbnails binary: data URIs in the file, a separate binary list on the wire', () => {
  const n = 12;
  const { grid, measurements } = synthetic(n);
  const seeds = Array.from({ length: n }, (_, i) => i);
  const plan = planAudit({ probes: n, strengths: grid, combinations: 'none' }, [unit('d', 'target')], { size: 4, layers: 1 }, ['target', 'other', 'third'], false);
  const stats = directionStatistics(measurements, plan, ['target', 'other', 'third'], seeds, 'target', new ProbeBootstrap(n, 200, 1));
  const png = encodePng({ width: 2, height: 1, data: new Uint8ClampedArray([255, 0, 0, 255, 0, 0, 255, 255]) });
  const judged = judgeDirection(stats, { reference: 2, settings: plan.settings, fewProbes: true, pathLengthGrid: grid });
  const report = assembleReport({
    plan, tool: 'test', generator: { name: 'g', fingerprint: 'f' }, attributes: [{ name: 'target', unit: '', source: 'card', sigma: 1.23456789 }],
    warnings: ['late warning'], directions: [directionReport('d', stats, judged, plan, [{ seed: 3, strength: 2, attribute: 'other', leakage: 0.1, before: png, after: png }])], combinations: [], groundTruth: null,
  });
  assert.deepEqual(report.warnings, [...plan.warnings, 'late warning'], 'plan warnings first');
  assert.equal(report.attributes[0].sigma, 1.23457, 'six significant digits');
  // PNG signature: 137 80 78 71 13 10 26 10 (ISO/IEC 15948 §5.2).
  assert.deepEqual(Array.from(report.directions[0].worstProbes[0].before.subarray(0, 8)), [137, 80, 78, 71, 13, 10, 26, 10]);
  const file = JSON.parse(JSON.stringify(auditReportFile(report)));
  const uri: string = file.directions[0].worstProbes[0].after;
  assert.match(uri, /^data:image\/png;base64,/);
  const decoded = decodeRgba(Buffer.from(uri.slice(uri.indexOf(',') + 1), 'base64'));
  assert.deepEqual([decoded.width, decoded.height, ...decoded.data.slice(0, 4)], [2, 1, 255, 0, 0, 255]);
  const wire = auditReportWire(report);
  assert.equal('before' in wire.report.directions[0].worstProbes[0], false, 'no images inside the wire report');
  assert.deepEqual(wire.thumbnails[0].before, png);
  assert.equal(wire.thumbnails[0].direction, 'd');
});
