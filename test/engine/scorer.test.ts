// User ONNX scorers through a scorer card: inputs resized and normalised as the card says,
// outputs read by name, used as audit attributes and as a feature path-length distance.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { ScorerModel } from '../../app/engine/scorer-model.ts';
import { Workspace, demoCardPath } from '../../app/engine/workspace.ts';
import { runAudit, type AuditReport } from '../../app/engine/audit/run.ts';
import { scorerModel, tempDir } from '../helpers/models.ts';

const solid = (w: number, h: number, rgb: [number, number, number]) => {
  const data = new Uint8ClampedArray(w * h * 4);
  for (let p = 0; p < w * h; p++) data.set([...rgb, 255], p * 4);
  return { width: w, height: h, data };
};

test('a scorer card drives a user model: resizing, normalisation and named outputs', async () => {
  const card = scorerModel(tempDir());
  const scorer = await ScorerModel.open(card, { threads: 1 });
  try {
    const s = await scorer.score([solid(128, 128, [255, 0, 51]), solid(64, 64, [102, 204, 0])]);
    assert.deepEqual(Array.from(s, (v) => Math.round(v * 1000) / 1000), [1, 0.2, 0.4, 0]);
    const f = await scorer.features([solid(128, 128, [255, 0, 0])]);
    assert.equal(f.width, 48);
  } finally {
    await scorer.dispose();
  }
});

test('scorer cards that do not match their model are refused with the file named', async () => {
  const dir = tempDir();
  scorerModel(dir);
  const bad = join(dir, 'bad.card.json');
  writeFileSync(bad, JSON.stringify({ format: 'plumbline.scorer-card', version: 1, name: 'x', file: 'scorer.onnx', input: { name: 'pixels', width: 32, height: 32 }, attributes: [{ name: 'a', output: 'logits' }] }));
  await assert.rejects(ScorerModel.open(bad), /scorer\.onnx: the scorer card names output 'logits' but the model's outputs are scores, features/);
  writeFileSync(bad, '{"format":"plumbline.scorer-card","version":1}');
  await assert.rejects(ScorerModel.open(bad), /bad\.card\.json: invalid scorer card/);
});

test('user scorer attributes and the feature distance take part in an audit', async () => {
  const card = scorerModel(tempDir());
  const scorer = await ScorerModel.open(card, { threads: 1 });
  const host = new Workspace({ threads: 1 });
  try {
    await host.openModel(demoCardPath());
    const dirs = host.openDirections(join(import.meta.dirname, '..', '..', 'resources', 'demo', 'sigil-directions.npy')).directions;
    const hue = host.direction(dirs.find((d) => d.name === 'hue_shift')!.id);
    const job = runAudit(host.generator!, [{ name: hue.name, target: 'redness', layers: hue.layers, vector: hue.vector, sigma: hue.sigma }], {
      probes: 8, attributes: ['redness', 'blueness'], sigmaSamples: 64, strengths: [-2, -1, 0, 1, 2], combinations: 'none', bootstrapResamples: 200, groundTruthSamples: 0,
      pathLength: { distance: 'features', epsilon: 0.01, spikeRatio: 5 },
    }, { scorers: [scorer], features: scorer });
    let r: IteratorResult<unknown, AuditReport>;
    do r = await job.next();
    while (!r.done);
    const d = r.value.directions[0];
    assert.deepEqual(r.value.attributes.map((a) => a.source), ['scorer', 'scorer']);
    assert.ok(Math.abs(d.targetEffect.value) > 0.1, 'hue moves redness');
    assert.ok(d.pathLength.value > 0 && Number.isFinite(d.pathLength.value));
    assert.equal(d.pathLength.distance, 'features');
  } finally {
    await scorer.dispose();
    await host.dispose();
  }
});
