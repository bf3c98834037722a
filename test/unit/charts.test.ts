// Chart data mapping: audit values to heatmap cells and curve rows with their CI bands.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { ATTRIBUTE_PALETTE, attributeColors, changeMapLevel, curveRows, heatDomain, heatmapCells, leadingAttributes, logAxis, niceMax, pathRows, tickLabel, tipNumber, worstProbeCaption } from '../../renderer/src/lib/charts.ts';
import { changeMapImage } from '../../app/core/audit/change-map.ts';
import { ciede2000, srgb8ToLab } from '../../app/core/color.ts';
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

test('the heatmap legend covers the largest coloured cell; its end is the nice() value d3-scale gives', async () => {
  // Outside reference: d3-scale 4 (a dependency of Observable Plot), scaleLinear().domain([0, max]).nice().
  // @ts-expect-error d3-scale ships no types; only scaleLinear().domain().nice().domain() is used.
  const { scaleLinear } = (await import('d3-scale')) as { scaleLinear: () => { domain(d?: number[]): any } };
  for (const max of [2.71, 0.37, 0.049, 1, 7.3, 13.2, 0.9999, 123.4]) {
    const d3End = scaleLinear().domain([0, max]).nice().domain()[1];
    assert.ok(Math.abs(niceMax(max) - d3End) < 1e-9, `max ${max}: ours ${niceMax(max)}, d3 ${d3End}`);
    assert.ok(niceMax(max) >= max);
  }
  // The case: cells reach 2.71 σ while the legend stopped at 1.
  const wide = { ...report, directions: [{ ...report.directions[0], dependency: { size: iv(2, 1.9, 2.1), backdrop: iv(2.71, 2.5, 2.9), hue: iv(0.1, 0.05, 0.15) } }] } as unknown as AuditWire;
  const [lo, hi] = heatDomain(heatmapCells(wide));
  assert.equal(lo, 0);
  assert.ok(hi >= 2.71 && Math.abs(hi - 2.8) < 1e-9, `legend ends at ${hi}`); // d3: 2.71 → 2.8
});

test('attribute colours: clearly distinct (Okabe–Ito), visible on the dark background, deterministic', () => {
  const colours = attributeColors(report);
  assert.deepEqual(Object.keys(colours), ['size', 'backdrop', 'hue']);
  assert.equal(new Set(ATTRIBUTE_PALETTE).size, ATTRIBUTE_PALETTE.length);
  assert.equal(colours.hue, ATTRIBUTE_PALETTE[2]);
  assert.deepEqual(attributeColors(report), colours);
  // Every colour is a valid sRGB hex colour and differs visibly from the dark background (#14181d):
  // WCAG 2.x relative luminance contrast of at least 3:1 for graphical objects (WCAG 2.1, 1.4.11).
  const lum = (hex: string) => {
    const c = [1, 3, 5].map((i) => parseInt(hex.slice(i, i + 2), 16) / 255).map((v) => (v <= 0.04045 ? v / 12.92 : ((v + 0.055) / 1.055) ** 2.4));
    return 0.2126 * c[0] + 0.7152 * c[1] + 0.0722 * c[2];
  };
  for (const c of ATTRIBUTE_PALETTE) {
    assert.match(c, /^#[0-9a-f]{6}$/);
    assert.ok((lum(c) + 0.05) / (lum('#14181d') + 0.05) >= 3, `${c} too dark on the slate background`);
  }
  // No two alike: CIEDE2000 of at least 20 between every pair (the old palette had a pair at 0
  // and one at about 8, #4fb3a1 and #5fd1c0).
  const lab = (hex: string) => srgb8ToLab(...([1, 3, 5].map((i) => parseInt(hex.slice(i, i + 2), 16)) as [number, number, number]));
  for (let i = 0; i < ATTRIBUTE_PALETTE.length; i++)
    for (let j = i + 1; j < ATTRIBUTE_PALETTE.length; j++) {
      const d = ciede2000(lab(ATTRIBUTE_PALETTE[i]), lab(ATTRIBUTE_PALETTE[j]));
      assert.ok(d >= 20, `${ATTRIBUTE_PALETTE[i]} and ${ATTRIBUTE_PALETTE[j]}: ΔE00 ${d.toFixed(1)}`);
    }
});

test("with more attributes than colours, the ones a direction's view draws together never share one", () => {
  const names = ['artifact', 'aspect', 'backdrop', 'finish', 'form', 'gem', 'glow', 'hue', 'outline', 'palette', 'rotation', 'saturation', 'shift_x', 'shift_y', 'size', 'spikiness'];
  const dependency = Object.fromEntries(names.map((n, i) => [n, iv(n === 'size' ? 2 : (i % 5) / 10, 0, 1)]));
  dependency.artifact = iv(0.9, 0.8, 1);
  const big = { ...report, attributes: names.map((name) => ({ name, unit: '', source: 'card', sigma: 1 })), directions: [{ ...report.directions[0], name: 'crest', target: 'size', dependency }] } as unknown as AuditWire;
  const colours = attributeColors(big, 'crest');
  assert.deepEqual(Object.keys(colours).sort(), [...names].sort());
  // The tryout's collision: artifact and size (the target and its largest leak) now differ.
  assert.notEqual(colours.size, colours.artifact);
  const view = leadingAttributes(big, 'crest', ATTRIBUTE_PALETTE.length - 1);
  assert.equal(view.length, ATTRIBUTE_PALETTE.length);
  assert.equal(new Set(view.map((a) => colours[a])).size, view.length);
  assert.deepEqual(attributeColors(big, 'crest'), colours);
});

test('tick labels are plain numbers (no bare exponents for ordinary values)', () => {
  assert.deepEqual([0, 0.5, 2, 0.01, 0.002, 150, 2e-5, 30000].map(tickLabel), ['0', '0.5', '2', '0.01', '0.002', '150', '2e-5', '3e4']);
});

test('log axis: covers the data, every tick a 1-2-5 value and both ends labelled (no odd 0.0091)', () => {
  assert.deepEqual(logAxis(0.0031, 0.0091), { domain: [0.002, 0.01], ticks: [0.002, 0.005, 0.01] });
  assert.deepEqual(logAxis(0.0031, 0.024), { domain: [0.002, 0.05], ticks: [0.002, 0.005, 0.01, 0.02, 0.05] });
  assert.deepEqual(logAxis(0.0011, 0.0019), { domain: [0.001, 0.002], ticks: [0.001, 0.002] });
  assert.deepEqual(logAxis(1e-5, 10).ticks, [1e-5, 1e-4, 0.001, 0.01, 0.1, 1, 10]);
  assert.deepEqual(logAxis(0.002, 0.002), { domain: [0.002, 0.005], ticks: [0.002, 0.005] });
  for (const [lo, hi] of [[0.0031, 0.0091], [0.37, 41], [2e-6, 3e-6], [1.01, 1.02], [0.004, 9000]]) {
    const { domain, ticks } = logAxis(lo, hi);
    assert.ok(domain[0] <= lo && domain[1] >= hi, `${lo}…${hi} within ${domain}`);
    assert.equal(ticks[0], domain[0]);
    assert.equal(ticks.at(-1), domain[1]);
    for (const t of ticks) assert.match(tickLabel(t), /^(1|2|5)(0*|e-?\d+)$|^0\.0*(1|2|5)$/, `tick ${t} of ${lo}…${hi}`);
  }
});

test('tooltips and strengths never read "-0"', () => {
  assert.equal(tipNumber(-0), '0');
  assert.equal(tipNumber(-0.0000001), '-1e-7'); // a real value, however small, is shown as one
  assert.equal(tipNumber(0.012345), '0.0123');
  assert.equal(tipNumber(-1.5), '-1.5');
  const negZero = { ...report, directions: [{ ...report.directions[0], curves: { ...report.directions[0].curves, strengths: [-1, -0, 1] }, pathLengthCurve: { ...report.directions[0].pathLengthCurve, strengths: [-1, -0, 1] } }] } as unknown as AuditWire;
  assert.ok(pathRows(negZero, 'bold').every((r) => !Object.is(r.strength, -0)));
  assert.ok(curveRows(negZero, 'bold').every((r) => !Object.is(r.strength, -0)));
});

/** The fixture audited with a calibrated instrument: hue set aside as within it, a composite reported but not judged. */
const calibrated = {
  ...report,
  attributes: [...report.attributes, { name: 'colourfulness', unit: '', source: 'image', sigma: 1, judged: false }],
  calibration: { probes: 24, operations: { invisible: [], exact: [] }, measures: {}, floorMultiple: 2, crossTalkMultiple: 1.5 },
  directions: [{
    ...report.directions[0],
    dependency: { ...report.directions[0].dependency, hue: iv(3.1, 2.9, 3.3), colourfulness: iv(4.4, 4, 4.8) },
    withinInstrument: [{ attribute: 'hue', change: 3.1, ratio: 1.55, noiseFloor: 1.8, crossTalk: 0.02 }],
    blind: [{ attribute: 'hue', limit: 3.6, blindTo: 'fail' }],
  }],
} as unknown as AuditWire;

test('heatmap: set-aside and unjudged cells are grey kinds of their own, say why, and never stretch the colour scale', () => {
  const cells = heatmapCells(calibrated);
  const kind = (a: string) => cells.find((c) => c.attribute === a)!;
  assert.deepEqual(['size', 'backdrop', 'hue', 'colourfulness'].map((a) => kind(a).kind), ['target', 'counted', 'set-aside', 'unjudged']);
  assert.match(kind('hue').label, /bold → hue: 3\.10 σ \(95% CI 2\.90–3\.30\) · set aside, not counted as a leak: within the instrument's own noise floor \(1\.80 σ\) or cross-talk \(0\.02 σ per σ\) · cannot detect a leak below 3\.60 σ here$/);
  assert.match(kind('colourfulness').label, /· reported, not judged: a composite or descriptor, never taken as a leak$/);
  assert.match(kind('backdrop').label, /· 0\.50 of the target$/);
  // Before: the legend ran to 5 (colourfulness 4.4 σ) and backdrop's real 1 σ leak looked faint beside the grey cells.
  assert.deepEqual(heatDomain(cells), [0, 1]);
});

test('worst-probe captions name only an attribute that counts beyond the instrument, else say nothing does', () => {
  assert.deepEqual(worstProbeCaption(calibrated, 'bold', { attribute: 'backdrop', leakage: 0.456 }), { attribute: 'backdrop', text: 'backdrop 0.46 σ' });
  // A set-aside attribute, an unjudged one, or none: nothing beyond the instrument.
  for (const probe of [{ attribute: 'hue', leakage: 0.8 }, { attribute: 'colourfulness', leakage: 1.2 }, { attribute: 'none', leakage: 0 }, { attribute: 'backdrop', leakage: 0 }]) {
    assert.deepEqual(worstProbeCaption(calibrated, 'bold', probe), { attribute: null, text: 'nothing beyond the instrument' }, probe.attribute);
  }
  // A leak that would print as 0.00 σ points at no attribute.
  assert.deepEqual(worstProbeCaption(calibrated, 'bold', { attribute: 'backdrop', leakage: 0.003 }), { attribute: null, text: 'under 0.01 σ beyond the instrument' });
  // Without a calibrated instrument there is no "beyond": no leak.
  assert.deepEqual(worstProbeCaption(report, 'bold', { attribute: 'none', leakage: 0 }), { attribute: null, text: 'no leak' });
});

test('the change map overlay reads its level back from the PNG exactly as the core drew it: linear in ΔE00 up to full scale', () => {
  const full = 20;
  const deltaE = Float32Array.from({ length: 201 }, (_, i) => (i * full * 1.2) / 200);
  const img = changeMapImage(deltaE, deltaE.length, 1, full);
  deltaE.forEach((d, p) => {
    const level = changeMapLevel(img.data[p * 4], img.data[p * 4 + 1], img.data[p * 4 + 2]);
    // 8-bit codes: within 1/255 of the true level (d / full, clipped at 1) — a 0.08 ΔE00 step at full scale 20.
    assert.ok(Math.abs(level - Math.min(1, d / full)) <= 1 / 255 + 1e-9, `ΔE00 ${d}: level ${level}`);
  });
  // Before, the overlay took the red channel alone, which saturates at half scale (ΔE00 10 drew as full colour).
  const half = changeMapImage(Float32Array.from([full / 2]), 1, 1, full);
  assert.ok(Math.abs(changeMapLevel(half.data[0], half.data[1], half.data[2]) - 0.5) < 1 / 255);
});

test('a direction whose target has no measure is greyed out whole in the heatmap: nothing of it is on the leak colour scale', () => {
  const unmeasured = { ...report, directions: [{ ...report.directions[0], name: 'glow', target: 'glow_strength', verdict: 'no-measure' }] } as unknown as AuditWire;
  const cells = heatmapCells(unmeasured);
  assert.equal(cells.length, 3);
  assert.ok(cells.every((c) => c.kind === 'unjudged' && !c.isTarget), JSON.stringify(cells.map((c) => c.kind)));
  assert.match(cells[1].label, /glow → backdrop: 1\.00 σ .*not judged: this direction's target glow_strength has no measure/);
  assert.doesNotMatch(cells[1].label, /of the target/);
});

test('a leak of zero with a zero upper bound names no attribute; any other leak names where it went', async () => {
  const { leakPhrase } = await import('../../renderer/src/lib/format.ts');
  assert.equal(leakPhrase({ value: 0, low: 0, high: 0, attribute: 'backdrop' }), '0.00 σ (no leak beyond the instrument)');
  assert.equal(leakPhrase({ value: 0, low: 0, high: 0.12, attribute: 'backdrop' }), '0.00 σ [0.00–0.12] into backdrop');
  assert.equal(leakPhrase({ value: 0.3141, low: 0.2, high: 0.45, attribute: 'hue' }, 3), '0.314 σ [0.200–0.450] into hue');
});

test('response curves draw the target and leaks only: not an attribute that is never judged, nor one set aside as within the instrument', () => {
  const r = {
    ...report,
    attributes: [...report.attributes, { name: 'colourfulness', unit: '', source: 'built-in', sigma: 1, judged: false }],
    directions: [{ ...report.directions[0], dependency: { ...report.directions[0].dependency, colourfulness: iv(3, 2.8, 3.2) }, withinInstrument: [{ attribute: 'hue', noiseFloor: 0.2, crossTalk: 0 }] }],
  } as unknown as AuditWire;
  assert.deepEqual(leadingAttributes(r, 'bold', 3), ['size', 'backdrop']);
});

test('response curves leave out attributes the direction does not move at all', () => {
  const r = { ...report, directions: [{ ...report.directions[0], dependency: { ...report.directions[0].dependency, hue: iv(0, 0, 0.02) } }] } as unknown as AuditWire;
  assert.deepEqual(leadingAttributes(r, 'bold', 3), ['size', 'backdrop']);
});
