// What the instrument can detect (app/core/audit/detection.ts): a measure's detection limit is the
// smallest leak beyond the instrument, floorMultiple × its noise floor (more where an exact
// operation's cross-talk adds to a direction's allowance), and a limit at or above a verdict
// threshold hides a leak that large. Worked examples by hand, then the same facts as the leak
// screen, the verdict reason, the worst probes and the report state them.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { blindMeasures, blindness, blindnessClauses, blindnessSentences, detectionLimit, formatLimit, measureDetection } from '../../app/core/audit/detection.ts';
import { directionStatistics, type DirectionMeasurements, type InstrumentAllowance, type StatisticsGrid } from '../../app/core/audit/statistics.ts';
import { judgeDirection } from '../../app/core/audit/verdict.ts';
import { blindnessWarnings, instrumentCalibrationReport } from '../../app/core/audit/report.ts';
import { ProbeBootstrap } from '../../app/core/stats.ts';

const T = { leakPass: 0.2, leakFail: 0.5 };

test('worked examples: limit = floorMultiple × noise floor; at or above a threshold it hides a leak that large', () => {
  // The tryout's case on the Disc generator: subject_detail's noise floor 59.5 σ → 2 × 59.5 = 119 σ,
  // far above the fail threshold: a leak into it can never register.
  assert.equal(detectionLimit(59.5, 2), 119);
  assert.deepEqual(measureDetection(59.5, 2, T), { detectionLimit: 119, blindTo: 'fail' });
  // 2 × 0.15 = 0.3 σ: sees a failing leak (0.5 σ reads as 0.2 beyond it) but not one at the pass threshold.
  assert.equal(blindness(detectionLimit(0.15, 2), T), 'review');
  // 2 × 0.05 = 0.1 σ: a leak at the pass threshold (0.2 σ) reads as 0.1 beyond it: it registers.
  assert.equal(blindness(detectionLimit(0.05, 2), T), null);
  // The boundaries belong to the blind side: a leak exactly at the threshold reads max(0, 0.2 − 0.2) = 0.
  assert.equal(blindness(detectionLimit(0.1, 2), T), 'review');
  assert.equal(blindness(detectionLimit(0.25, 2), T), 'fail');
  // An unknown floor claims nothing; a measure with no spread (infinite floor in σ) sees nothing.
  assert.equal(blindness(NaN, T), null);
  assert.equal(blindness(Infinity, T), 'fail');
  // The thresholds are the audit's settings: at leakPass 0.1 / leakFail 0.25 the same 0.3 σ hides a failing leak.
  assert.equal(blindness(0.3, { leakPass: 0.1, leakFail: 0.25 }), 'fail');
  assert.deepEqual([0.912, 12.34, 119, 0.3, 0.00431, 0].map(formatLimit), ['0.91', '12.3', '119', '0.30', '0.0043', '0']);
});

test('blind measures of a calibration: judged ones only, largest limit first, said in words per threshold', () => {
  const measures = { subject_x: { noiseFloor: 0.01 }, shape_roundness: { noiseFloor: 0.455 }, subject_detail: { noiseFloor: 59.5 }, background_chroma: { noiseFloor: 0.16 }, colourfulness: { noiseFloor: 3 } };
  const blind = blindMeasures(measures, 2, T, (n) => n !== 'colourfulness');
  assert.deepEqual(blind, [
    { attribute: 'subject_detail', limit: 119, blindTo: 'fail' },
    { attribute: 'shape_roundness', limit: 0.91, blindTo: 'fail' },
    { attribute: 'background_chroma', limit: 0.32, blindTo: 'review' },
  ]);
  assert.deepEqual(blindnessSentences(blind, T), [
    'subject_detail cannot detect a leak below 119 σ and shape_roundness below 0.91 σ on this generator — at or above the fail threshold (0.5 σ): a failing leak into them would read as none',
    'background_chroma cannot detect a leak below 0.32 σ on this generator — at or above the pass threshold (0.2 σ): it cannot tell pass from review',
  ]);
  assert.deepEqual(blindnessSentences([], T), []);
  // In a verdict's reason, compactly: the names, the range of their limits, and where a limit comes from.
  assert.deepEqual(blindnessClauses(blind, T), [
    'cannot see a failing leak (0.5 σ) into subject_detail or shape_roundness (detection limits 0.91–119 σ on this generator)',
    'cannot tell pass from review for background_chroma (detection limit 0.32 σ on this generator)',
  ]);
  assert.deepEqual(blindnessClauses([{ attribute: 'edge_width', limit: 46.6, blindTo: 'fail', via: 'orientation' }, { attribute: 'symmetry', limit: 8.6, blindTo: 'fail' }], T), [
    'cannot see a failing leak (0.5 σ) into edge_width or symmetry (detection limits 8.60–46.6 σ for this direction; some set by cross-talk of the exact operation that moves orientation)',
  ]);
});

test('the report states each measure’s limit and warns of the blind ones (never of a measure only reported)', () => {
  const calibration = instrumentCalibrationReport({
    probes: 24,
    operations: { invisible: ['±1 dither'], exact: ['translate (3, −2) px'] },
    measures: { subject_x: { noiseFloor: 0.01, crossTalk: { 'translate (3, −2) px': null } }, subject_detail: { noiseFloor: 59.5, crossTalk: { 'translate (3, −2) px': 0.4 } }, colourfulness: { noiseFloor: 3, crossTalk: { 'translate (3, −2) px': 0 } } },
  }, 2, 1.5, T);
  assert.equal(calibration.measures.subject_x.detectionLimit, 0.02);
  assert.equal(calibration.measures.subject_x.blindTo, null);
  assert.deepEqual([calibration.measures.subject_detail.detectionLimit, calibration.measures.subject_detail.blindTo], [119, 'fail']);
  const warnings = blindnessWarnings(calibration, [{ name: 'subject_x' }, { name: 'subject_detail' }, { name: 'colourfulness', judged: false }], T);
  assert.deepEqual(warnings, ['blind measures: subject_detail cannot detect a leak below 119 σ on this generator — at or above the fail threshold (0.5 σ): a failing leak into it would read as none; a pass does not clear it']);
  assert.deepEqual(blindnessWarnings(null, [], T), []);
});

const ATTRIBUTES = ['size', 'hue', 'backdrop', 'detail'];
const PLAN: StatisticsGrid = { grid: [-2, 0, 2], pathLengthGrid: [0], reference: 2, settings: { leakPass: 0.2, leakFail: 0.5, worstProbes: 3, pathLength: { spikeRatio: 3 } } };
/** hue's floor 0.05 σ (limit 0.1), detail's 0.3 σ (limit 0.6 ≥ leakFail); the size operation moves backdrop by 0.1 of its own change. */
const INSTRUMENT: InstrumentAllowance = {
  floor: [0.01, 0.05, 0.01, 0.3],
  crossTalk: (owner) => (owner === 'size' ? [0, 0, 0.1, 0] : [0, 0, 0, 0]),
  floorMultiple: 2,
  crossTalkMultiple: 1.5,
};
const constant = (n: number, v: number) => new Float64Array(n).fill(v);
const seedsOf = (n: number) => Array.from({ length: n }, (_, i) => i);
function measurements(plus: Float64Array[], minus: Float64Array[]): DirectionMeasurements {
  return { change: [minus, null, plus], pathLength: [constant(plus[0].length, 1)] };
}

test('a leak as large as the fail threshold into a blind measure reads as none — and the reason says so instead of calling it clean', () => {
  const n = 40;
  // size ±2 σ; detail 0.55 σ on every probe (past leakFail, within its limit 0.6); backdrop 0.25 σ
  // (within 1.5 × 0.1 × 2 = 0.3, the size operation's cross-talk at this change: blind to review here).
  const m = measurements([constant(n, 2), constant(n, 0), constant(n, 0.25), constant(n, 0.55)], [constant(n, -2), constant(n, 0), constant(n, 0.25), constant(n, 0.55)]);
  const s = directionStatistics(m, PLAN, ATTRIBUTES, seedsOf(n), 'size', new ProbeBootstrap(n, 200, 1), undefined, INSTRUMENT);
  assert.equal(s.leakage.attribute, 'none');
  assert.equal(s.leakage.value, 0);
  assert.deepEqual(s.blind, [
    { attribute: 'detail', limit: 0.6, blindTo: 'fail' },
    { attribute: 'backdrop', limit: 0.3, blindTo: 'review', via: 'size' },
  ]);
  const judged = judgeDirection(s, { reference: 2, settings: PLAN.settings, fewProbes: false, pathLengthGrid: [0] });
  // The verdict rule is unchanged (nothing beyond the instrument: a pass), but it is not called clean.
  assert.equal(judged.verdict, 'pass');
  assert.match(judged.reason, /^clean within ±2 in the measures that can see a leak: /);
  assert.match(judged.reason, /; cannot see a failing leak \(0\.5 σ\) into detail \(detection limit 0\.60 σ on this generator\); cannot tell pass from review for backdrop \(detection limit 0\.30 σ for this direction; set by cross-talk of the exact operation that moves size\); set aside as within/);
  // Without blind measures the reason stays as it was.
  const seeing = { ...s, blind: [] };
  assert.match(judgeDirection(seeing, { reference: 2, settings: PLAN.settings, fewProbes: false, pathLengthGrid: [0] }).reason, /^clean within ±2: no other attribute moves beyond/);
  // Past its limit the same measure's leak registers, by its excess: 0.9 − 0.6 = 0.3 σ.
  const past = measurements([constant(n, 2), constant(n, 0), constant(n, 0), constant(n, 0.9)], [constant(n, -2), constant(n, 0), constant(n, 0), constant(n, 0.9)]);
  const p = directionStatistics(past, PLAN, ATTRIBUTES, seedsOf(n), 'size', new ProbeBootstrap(n, 200, 1), undefined, INSTRUMENT);
  assert.equal(p.leakage.attribute, 'detail');
  assert.ok(Math.abs(p.leakage.value - 0.3) < 1e-9);
});

test('worst probes name only an attribute that counts beyond the instrument, or none', () => {
  const n = 40;
  // hue: mean 0.08 σ (within 2 × 0.05) with one probe at 0.9 σ — that measure's own scatter, set aside.
  const hue = Float64Array.from({ length: n }, (_, p) => (p === 7 ? 0.9 : (0.08 * n - 0.9) / (n - 1)));
  const clean = measurements([constant(n, 2), hue, constant(n, 0), constant(n, 0)], [constant(n, -2), hue, constant(n, 0), constant(n, 0)]);
  const a = directionStatistics(clean, PLAN, ATTRIBUTES, seedsOf(n), 'size', new ProbeBootstrap(n, 200, 1), undefined, INSTRUMENT);
  assert.ok(a.withinInstrument.some((w) => w.attribute === 'hue'));
  // Before: probe 7 was captioned "hue 0.80" (its 0.9 σ less the 0.1 allowance), a set-aside attribute.
  assert.ok(a.worstProbes.length > 0);
  for (const w of a.worstProbes) assert.deepEqual([w.attribute, w.leakage], ['none', 0]);
  // A real backdrop leak (0.6 σ, 0.3 σ beyond its allowance) names backdrop, each probe by its share beyond: 0.6 × 0.3 / 0.6.
  const leaky = measurements([constant(n, 2), hue, constant(n, 0.6), constant(n, 0)], [constant(n, -2), hue, constant(n, 0.6), constant(n, 0)]);
  const b = directionStatistics(leaky, PLAN, ATTRIBUTES, seedsOf(n), 'size', new ProbeBootstrap(n, 200, 1), undefined, INSTRUMENT);
  assert.equal(b.worstProbes[0].attribute, 'backdrop');
  assert.ok(Math.abs(b.worstProbes[0].leakage - 0.3) < 1e-9, `worst probe leaks ${b.worstProbes[0].leakage}`);
});
