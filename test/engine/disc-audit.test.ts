// Acceptance for issue 9: the second test generator of our own (resources/disc, "Disc stamps": no
// model card, no attribute output, [0, 1] output) audited from its images alone. Its factors are
// orthonormal projections of z read by an authored graph, so each direction's truth is known by
// construction (resources/disc/README.md): four clean, one leaky into background_lightness, one
// nearly clean (0.1 into subject_hue), one inert, and one whose target has no measure. Every
// verdict must match, the leak must be named right, and the report must carry the instrument's
// calibration and the change maps.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import { authorDisc, type DiscTruth } from '../../resources/author-disc.ts';
import { Workspace } from '../../app/engine/workspace.ts';
import { runAudit, type AuditReport } from '../../app/engine/audit/run.ts';
import { tempDir } from '../helpers/models.ts';

const resources = join(import.meta.dirname, '..', '..', 'resources', 'disc');
let host: Workspace;
let report: AuditReport;
let truth: { name: string; target: string; truth: DiscTruth }[];

before(async () => {
  host = new Workspace({ threads: 1 });
  await host.openModel(join(resources, 'disc.onnx'));
  const directions = host.openDirections(join(resources, 'disc-directions.npy')).directions.map((d) => {
    const x = host.direction(d.id);
    return { name: x.name, target: x.target, layers: x.layers, vector: x.vector, sigma: x.sigma };
  });
  truth = JSON.parse(readFileSync(join(resources, 'disc-directions.json'), 'utf8')).directions;
  // Small but sufficient: 32 probes (≥ the 30 needed to pass), the grid around ±2, no pairs.
  const job = runAudit(host.generator!, directions, { probes: 32, sigmaSamples: 128, strengths: [-2, -1, 0, 1, 2], combinations: 'none', bootstrapResamples: 300, attributes: 'image', groundTruthSamples: 0 });
  for (;;) {
    const s = await job.next();
    if (s.done) {
      report = s.value;
      break;
    }
  }
});
after(async () => host.dispose());

test('authoring twice gives identical bytes, equal to the committed resources/disc', () => {
  const a = tempDir();
  const b = tempDir();
  authorDisc(a);
  authorDisc(b);
  for (const f of readdirSync(a)) {
    const x = readFileSync(join(a, f));
    assert.ok(x.equals(readFileSync(join(b, f))), `${f} differs between two runs`);
    assert.ok(x.equals(readFileSync(join(resources, f))), `${f} differs from the committed resources/disc/${f}; rerun npm run author:disc`);
  }
});

test('opened without a card, its [0, 1] output range is inferred and listed among the assumptions', () => {
  assert.deepEqual(host.generator!.range, [0, 1]);
  assert.ok(host.generator!.info.assumptions.some((a) => a.startsWith('output range inferred as [0, 1]')));
});

test('audited from its images alone, every verdict matches the documented truth and the leak is named right', () => {
  const table = report.directions.map((d) => `${d.name}: ${d.verdict} (${d.leakage.attribute} ${d.leakage.value}) — ${d.reason}`).join('\n');
  for (const t of truth) {
    const d = report.directions.find((x) => x.name === t.name)!;
    assert.ok(d, t.name);
    if (t.truth.verdict === 'no-measure') {
      assert.equal(d.verdict, 'no-measure', table);
      assert.equal(d.target, t.target);
      assert.match(d.reason, new RegExp(`no measure for its target ${t.target} — define one`));
    } else if (t.truth.verdict === 'pass') {
      assert.equal(d.verdict, 'pass', table);
      assert.deepEqual(d.safeRange, [-2, 2]);
    } else if (t.truth.leaksInto.length) {
      assert.equal(d.verdict, 'fail', table);
      assert.ok(t.truth.leaksInto.includes(d.leakage.attribute), `${t.name} names ${d.leakage.attribute}; truth ${t.truth.leaksInto}`);
    } else {
      assert.equal(d.verdict, 'fail', table);
      assert.match(d.reason, /barely moves its target/);
    }
  }
  // Nearly clean: the 0.1 hue leak is seen at about its size, and still passes.
  const drift = report.directions.find((x) => x.name === 'drift')!;
  assert.equal(drift.leakage.attribute, 'subject_hue');
  assert.ok(drift.leakage.value > 0.05 && drift.leakage.value < 0.15, `drift leaks ${drift.leakage.value}`);
});

test('the instrument is calibrated in the report, and apparent leaks within it are named, not counted', () => {
  const c = report.calibration!;
  assert.ok(c && c.probes > 0);
  // Position has a floor far below any visible move; pure-noise shape measures a floor near their σ.
  assert.ok(c.measures.subject_x.noiseFloor < 0.05, `subject_x floor ${c.measures.subject_x.noiseFloor}`);
  assert.ok(c.measures.shape_roundness.noiseFloor > 0.3, `roundness floor ${c.measures.shape_roundness.noiseFloor}`);
  const grow = report.directions.find((x) => x.name === 'grow')!;
  assert.ok(grow.withinInstrument.length > 0);
  assert.match(grow.reason, /set aside as within the instrument's own noise floor or cross-talk/);
  assert.equal(report.noSubject?.probes, 0);
});

test('change maps say where each direction acts, and the target effect is consistent across seeds', () => {
  const map = (name: string) => report.directions.find((x) => x.name === name)!.changeMap!;
  assert.ok(map('slide').shares.edge > 0.9, 'a slide changes the outline');
  assert.ok(map('tint').shares.subject > 0.4 && map('tint').shares.background === 0, 'a hue turn changes the subject only');
  assert.ok(map('swell').shares.background > 0.3, 'the leaky swell also changes the background');
  assert.equal(map('still').meanDeltaE, 0, 'the inert direction changes no pixel');
  assert.ok(map('slide').png.length > 100 && map('slide').width === 64);
  for (const name of ['slide', 'grow', 'tint', 'drift']) {
    const c = report.directions.find((x) => x.name === name)!.consistency;
    assert.equal(c.flipShare, 0, `${name} moves its target the same way on every probe`);
    assert.ok(c.coefficientOfVariation < 0.5, `${name} cv ${c.coefficientOfVariation}`);
  }
});

test('the report says which measures cannot see a leak on this generator; a pass names them; worst probes never name a set-aside one', () => {
  const c = report.calibration!;
  // A texture-free stamp: subject_detail barely varies, so its noise floor is many of its σ and its
  // detection limit (floorMultiple × floor) is far above the fail threshold. Position sees 0.2 σ.
  const detail = c.measures.subject_detail;
  assert.ok(Math.abs(detail.detectionLimit - c.floorMultiple * detail.noiseFloor) <= 1e-5 * detail.detectionLimit);
  assert.equal(detail.blindTo, 'fail');
  assert.equal(c.measures.subject_x.blindTo, null);
  assert.ok(report.warnings.some((w) => /^blind measures: .*subject_detail cannot detect a leak below [\d.]+ σ.* on this generator — at or above the fail threshold \(0\.5 σ\)/.test(w)), report.warnings.join('\n'));
  const slide = report.directions.find((x) => x.name === 'slide')!;
  assert.equal(slide.verdict, 'pass');
  assert.ok(slide.blind.some((b) => b.attribute === 'subject_detail' && b.blindTo === 'fail'));
  assert.match(slide.reason, /^clean within ±2 in the measures that can see a leak: .*; cannot see a failing leak \(0\.5 σ\) into [a-z_, ]*subject_detail/);
  for (const d of report.directions)
    for (const w of d.worstProbes) {
      assert.ok(!d.withinInstrument.some((x) => x.attribute === w.attribute), `${d.name}: worst probe names set-aside ${w.attribute}`);
      assert.ok(!['colourfulness', 'shape_fold'].includes(w.attribute), `${d.name}: worst probe names unjudged ${w.attribute}`);
    }
});
