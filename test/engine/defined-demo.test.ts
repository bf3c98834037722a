// Acceptance (issue 9): the demo audited from its images alone — its attribute output is ignored
// by the audit — with defined attributes for gem, outline and glow. The tags those attributes are
// defined from are derived by this test script from the demo's own attribute output (the top
// third of 150 seeds by the card's gem / outline / glow value "has it", the bottom third "lacks
// it"), standing in for a lead tagging seeds by eye; that is the only use of the attribute output.
// Expected, from the demo's documented truth (resources/demo/README.md, image-only table):
// crest_size and turn pass; outline_bold fails with a background measure among its leaks; axis_07
// fails; glow_surge's break is found.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { join } from 'node:path';
import { Workspace, demoCardPath } from '../../app/engine/workspace.ts';
import { runAudit, type AuditReport } from '../../app/engine/audit/run.ts';
import type { AuditDirection } from '../../app/core/audit/plan.ts';
import { DefinedAttribute, defineAttribute } from '../../app/engine/defined-attributes.ts';
import type { TagSet } from '../../app/core/attributes/scorer-file.ts';

const root = join(import.meta.dirname, '..', '..');
const demoDir = join(root, 'resources', 'demo');
const PSI = 0.7;
const TAG_SEEDS = 150;
/** Image-only targets: what a lead auditing from images would name each demo direction's target. */
const TARGETS: Record<string, string | null> = { crest_size: 'subject_radius', turn: 'orientation', outline_bold: 'outline', glow_surge: 'glow', axis_07: null };

let host: Workspace;
before(async () => {
  host = new Workspace({ threads: 1 });
  await host.openModel(demoCardPath());
});
after(async () => host.dispose());

async function drain(job: AsyncGenerator<unknown, AuditReport, void>): Promise<AuditReport> {
  for (;;) {
    const s = await job.next();
    if (s.done) return s.value;
  }
}

test('the demo from its images alone, with gem, outline and glow defined from derived tags', { timeout: 3_600_000 }, async () => {
  const gen = host.requireGenerator();
  // Tags derived from the demo's attribute output (see the header): terciles over 150 seeds.
  const seeds = Array.from({ length: TAG_SEEDS }, (_, i) => i);
  const rendered = await gen.renderSeeds(seeds, PSI, []);
  const width = rendered.attributes!.length / TAG_SEEDS;
  const defined: DefinedAttribute[] = [];
  for (const name of ['gem', 'outline', 'glow']) {
    const column = gen.attributeNames.indexOf(name);
    const values = seeds.map((_, i) => rendered.attributes![i * width + column]);
    const order = seeds.map((_, i) => i).sort((a, b) => values[a] - values[b]);
    const third = Math.floor(TAG_SEEDS / 3);
    const lacks = order.slice(0, third).map((i) => seeds[i]);
    const has = order.slice(-third).map((i) => seeds[i]);
    const set: TagSet = { name, kind: 'tags', seeds: [...has, ...lacks], labels: [...has.map(() => 1), ...lacks.map(() => 0)], psi: PSI };
    const { doc, refused } = await defineAttribute(gen, set);
    process.stdout.write(`# defined ${name}: AUC ${doc.accuracy.value.toFixed(3)} (folds ${doc.accuracy.perFold.map((v) => v?.toFixed(2)).join(', ')})\n`);
    assert.equal(refused, null, `${name}: ${refused}`);
    assert.equal(doc.accuracy.noisy, false, '50 seeds per class is above the noisy-estimate limit');
    defined.push(new DefinedAttribute(doc, null));
  }

  const all = host.openDirections(join(demoDir, 'sigil-directions.npy')).directions.map((d) => host.direction(d.id));
  const direction = (name: string): AuditDirection => {
    const d = all.find((x) => x.name === name)!;
    return { name, target: TARGETS[name], layers: d.layers, vector: d.vector, sigma: d.sigma };
  };
  const settings = { probes: 32, psi: PSI, attributes: 'image' as const, strengths: [-3, -2, -1, 0, 1, 2, 2.5, 3], sigmaSamples: 128, combinations: 'none' as const, groundTruthSamples: 0, bootstrapResamples: 400, worstProbes: 0, nullDirections: 0, referencePathSamples: 0 };
  // No null baseline or published-form path length here: they take no part in a verdict, and the
  // null baseline's own checks live in test/engine/audit-steps.test.ts and audit.test.ts.
  // turn is audited on its own: a failure to measure its target must not hide the other rows.
  const failures: string[] = [];
  const reports: AuditReport[] = [];
  for (const group of [['crest_size', 'outline_bold', 'axis_07', 'glow_surge'], ['turn']]) {
    try {
      reports.push(await drain(runAudit(gen, group.map(direction), settings, { defined })));
    } catch (err) {
      failures.push(`${group.join(', ')}: the audit stopped: ${(err as Error).message}`);
      process.stdout.write(`# audit of ${group.join(', ')} stopped: ${(err as Error).message}\n`);
    }
  }
  const check = (ok: boolean, what: string) => {
    process.stdout.write(`# ${ok ? 'as expected' : 'NOT as expected'}: ${what}\n`);
    if (!ok) failures.push(what);
  };
  for (const report of reports) {
    // The accuracy travels with the attribute into the report.
    for (const name of ['gem', 'outline', 'glow']) check(/^AUC 0\.\d\d \(5-fold CV; 50 have \/ 50 lack it; floor 0\.75\)/.test(report.attributes.find((a) => a.name === name)?.accuracy ?? ''), `report carries ${name}'s accuracy`);
    for (const d of report.directions) process.stdout.write(`# ${d.name} → ${d.target}: ${d.verdict} — ${d.reason}\n`);
  }
  const by = (name: string) => reports.flatMap((r) => r.directions).find((d) => d.name === name);
  /** Attributes a direction moves by at least the pass threshold relative to its target. */
  const leaks = (name: string) => {
    const d = by(name)!;
    const t = d.dependency[d.target].value;
    return Object.entries(d.dependency).filter(([a, iv]) => a !== d.target && iv.value / t >= 0.15).map(([a]) => a);
  };
  for (const name of ['crest_size', 'turn']) if (by(name)) check(by(name)!.verdict === 'pass', `${name} passes (${by(name)!.verdict}: ${by(name)!.reason})`);
  if (by('outline_bold')) {
    // Image-only truth (resources/demo/README.md): its backdrop leak is 0.7 of its outline change by
    // construction, but the defined outline attribute moves only about 0.6 σ at ±2, so the leak in
    // σ of background lightness (issue 14's unit) sits between the pass and fail thresholds: not a
    // pass, and the leak named is a background measure, confidently beyond the pass threshold.
    const ob = by('outline_bold')!;
    check(ob.verdict !== 'pass' && ob.leakage.attribute.startsWith('background_') && ob.leakage.low >= 0.2, `outline_bold does not pass and leaks into a background measure confidently beyond 0.2 σ (${ob.verdict}: ${ob.leakage.attribute} ${ob.leakage.value} σ, 95% CI ${ob.leakage.low}–${ob.leakage.high})`);
    check(leaks('outline_bold').some((a) => a.startsWith('background_')), `outline_bold has a background measure among its leaks (${leaks('outline_bold').join(', ')})`);
  }
  if (by('axis_07')) check(by('axis_07')!.verdict === 'fail', `axis_07 fails (${by('axis_07')!.verdict}: ${by('axis_07')!.reason})`);
  const glow = by('glow_surge');
  if (glow) check(glow.breaksAt !== null && glow.breaksAt <= 3 && glow.safeRange[1] < 3, `glow_surge's break is found (breaks at ${glow.breaksAt}, safe range ${glow.safeRange.join('…')})`);
  assert.deepEqual(failures, []);
});
