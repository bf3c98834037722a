// `plumbline discover`, `plumbline audit` and `plumbline repair`.
import type { Command } from 'commander';
import { resolve } from 'node:path';
import { writeFileAtomic } from '../core/atomic-write.ts';
import { writeDirections } from '../core/direction-files.ts';
import { PlumblineError } from '../core/errors.ts';
import { runAudit, type AuditReport } from '../engine/audit/run.ts';
import { auditReportFile } from '../core/audit/report.ts';
import { detectionWords, formatLimit } from '../core/audit/detection.ts';
import { Workspace, demoCardPath } from '../engine/workspace.ts';
import { discover } from '../engine/lab.ts';
import { driveSteps } from '../engine/handlers/context.ts';
import { repairInWorkspace } from '../engine/handlers/repair.ts';
import { parseSeeds } from './seeds.ts';
import { runCliJob } from './jobs.ts';
import { PROBE_LIMITS } from '../protocol/messages.ts';
import { ScorerModel } from '../engine/scorer-model.ts';
import { DefinedAttribute, loadProjectAttributes } from '../engine/defined-attributes.ts';
import { defineFromTagsFile } from './define-commands.ts';
import { latentFileReference } from '../engine/references.ts';
import { referenceProbe } from '../engine/audit/probes.ts';
import type { ReferenceProbe } from '../core/audit/plan.ts';

/** `audit --pin-latents a.npy,b.npy`: each file one latent, named by its file name (see latentFileReference). */
function readPinnedLatents(list: string, layout: { layers: number; size: number }): ReferenceProbe[] {
  return list.split(',').filter(Boolean).map((f) => {
    const r = latentFileReference(resolve(f), layout, '--pin-latents');
    return referenceProbe(r.name, r.latent, r.imageSha256);
  });
}
import { Farm, type RunProgress } from '../engine/farm/coordinator.ts';
import { farmAuditMeasurer } from '../engine/farm/audit-units.ts';
import { farmPassword, farmSummary } from './farm-commands.ts';

export interface CliContext {
  progressBar(total: number, label: string): { update(n: number, label?: string): void; stop(): void };
  /** Aborted by Ctrl+C or SIGTERM. */
  interrupt: AbortSignal;
  /** What the first Ctrl+C or SIGTERM says it does (default: cancelling after the current batch). */
  onInterruptSay(words: string): void;
  usage(message: string): Error;
}

function parseLayers(text: string | undefined, usage: CliContext['usage']): [number, number] | null {
  if (!text) return null;
  const m = /^(\d+)(?:-(\d+))?$/.exec(text);
  if (!m) throw usage(`--layers: '${text}' is not a layer or an inclusive range like 0-3`);
  const a = Number(m[1]);
  const b = m[2] === undefined ? a : Number(m[2]);
  if (b < a) throw usage(`--layers: range '${text}' runs backwards`);
  return [a, b + 1];
}

function parseGrid(text: string, usage: CliContext['usage']): number[] {
  // "-3:3:0.5" (from:to:step) or "a,b,c"
  const range = /^(-?[\d.]+):(-?[\d.]+):([\d.]+)$/.exec(text);
  if (range) {
    const [from, to, step] = range.slice(1).map(Number);
    if (!(step > 0) || to < from) throw usage(`--strengths: '${text}' must be from:to:step with step > 0`);
    const out: number[] = [];
    for (let v = from; v <= to + 1e-9; v += step) out.push(Math.round(v * 1e6) / 1e6);
    return out;
  }
  const list = text.split(',').map(Number);
  if (list.some((v) => !Number.isFinite(v))) throw usage(`--strengths: '${text}' is not a list of numbers or from:to:step`);
  return list;
}

/** A workspace with the generator open (the bundled demo unless --model names one). */
export async function openWorkspace(model: string | undefined, threads: number | undefined): Promise<Workspace> {
  const workspace = new Workspace({ threads });
  try {
    await workspace.openModel(resolve(model ?? demoCardPath()));
  } catch (err) {
    await workspace.dispose();
    throw err;
  }
  return workspace;
}

/** Loads a directions file into the workspace; `only` picks directions by name. */
export function loadDirections(workspace: Workspace, file: string, only?: string[]) {
  const info = workspace.openDirections(resolve(file));
  const all = info.directions.map((d) => workspace.direction(d.id));
  if (!only?.length) return all;
  return only.map((name) => {
    const d = all.find((x) => x.name === name);
    if (!d) throw new PlumblineError('bad-request', `${file}: no direction named '${name}'; it holds ${all.map((x) => x.name).join(', ')}`);
    return d;
  });
}

const pad = (s: string, n: number) => (s.length > n ? s.slice(0, n - 1) + '…' : s.padEnd(n));
const f2 = (v: number) => (Number.isFinite(v) ? v.toFixed(2) : '—');
const sgn = (v: number) => (v > 0 ? `+${v}` : `${v}`);
const pc = (v: number) => `${(v * 100).toFixed(1)}%`;

/**
 * The instrument as calibrated in this audit, after the verdicts: per measure its noise floor, its
 * detection limit (the smallest leak the audit can register in it, app/core/audit/detection.ts)
 * and what that lets it see at this audit's thresholds, and its largest cross-talk with the exact
 * operation showing it; then the probes on which no subject separated, when the built-in measures ran.
 */
export function instrumentTable(report: AuditReport): string[] {
  const out: string[] = [];
  const c = report.calibration;
  if (c) {
    out.push('', `instrument (calibrated on ${c.probes} probes): a leak counts only beyond its detection limit (${c.floorMultiple}× the noise floor) and ${c.crossTalkMultiple}× the cross-talk into it; a smaller leak reads as none, a larger one as its excess`);
    const judged = (name: string) => report.attributes.find((a) => a.name === name)?.judged !== false;
    const rows = Object.entries(c.measures).map(([name, m]) => {
      let worst: { op: string; value: number } | null = null;
      for (const [op, v] of Object.entries(m.crossTalk)) if (typeof v === 'number' && Number.isFinite(v) && v > 0 && (!worst || v > worst.value)) worst = { op, value: v };
      // null where the operation owns the measure (it moves it by construction).
      const owned = Object.values(m.crossTalk).some((v) => v === null);
      return [
        judged(name) ? name : `${name} (reported, not judged)`,
        Number.isFinite(m.noiseFloor) ? m.noiseFloor.toFixed(3) : '—',
        formatLimit(m.detectionLimit),
        judged(name) ? detectionWords(m.blindTo, report.settings) : 'not judged',
        worst ? f2(worst.value) : '—',
        worst?.op ?? (owned ? 'unmoved by every other exact operation' : 'unmoved by every exact operation'),
      ];
    });
    const head = ['measure', 'noise floor σ', 'detection limit σ', 'can it see a leak?', 'largest cross-talk σ/σ', 'under'];
    const widths = head.map((h, k) => Math.max(h.length, ...rows.map((r) => r[k].length)));
    const line = (r: string[]) => r.map((cell, k) => pad(cell, widths[k])).join('  ').trimEnd();
    out.push(line(head), widths.map((w) => '─'.repeat(w)).join('  '), ...rows.map(line));
    out.push(`cross-talk: σ of the measure per σ of the measure the operation owns (e.g. per σ of subject_x under a translation)`);
  }
  if (report.noSubject) {
    const { probes, of } = report.noSubject;
    out.push(probes > 0 ? `no-subject probes: ${probes} of ${of} — no subject separated from the background; subject measures leave those out` : `no-subject probes: 0 of ${of} — a subject separated on every probe`);
  }
  return out;
}

export function auditTable(report: AuditReport): string {
  // A direction with no measure for its target was judged on nothing: its leak columns stay empty
  // rather than show numbers read against whichever measure moved most.
  const judged = (d: AuditReport['directions'][number], text: string) => (d.verdict === 'no-measure' ? '—' : text);
  const rows = report.directions.map((d) => [
    d.name,
    d.target + (d.targetChosen ? '*' : ''),
    d.verdict.toUpperCase(),
    judged(d, `${f2(d.leakage.value)} [${f2(d.leakage.low)}–${f2(d.leakage.high)}]`),
    judged(d, d.leakage.attribute),
    judged(d, `${f2(d.targetEffect.value)} σ`),
    judged(d, `${d.exceedance.count}/${d.exceedance.probes} [${pc(d.exceedance.low)}–${pc(d.exceedance.high)}]`),
    d.nullBaseline ? `${Math.round(d.nullBaseline.targetEffect)}/${Math.round(d.nullBaseline.leakage)}/${Math.round(d.nullBaseline.pathLength)}` : '—',
    `${d.pathLength.value.toPrecision(3)}`,
    `${sgn(d.safeRange[0])}…${sgn(d.safeRange[1])}`,
  ]);
  const head = ['direction', 'target', 'verdict', `leakage @±${report.settings.referenceStrength} σ [95% CI]`, 'leaks most into', 'target effect', `probes ≥ ${report.settings.leakPass} σ [95% CI]`, 'null pct t/l/p', `path length (${report.settings.pathLength.distance})`, 'safe range'];
  const widths = head.map((h, k) => Math.max(h.length, ...rows.map((r) => r[k].length)));
  const line = (r: string[]) => r.map((c, k) => pad(c, widths[k])).join('  ');
  const out = [line(head), widths.map((w) => '─'.repeat(w)).join('  '), ...rows.map(line), ''];
  for (const d of report.directions) out.push(`${d.name}: ${d.verdict} — ${d.reason}`);
  out.push(...instrumentTable(report));
  const flagged = report.combinations.filter((c) => c.verdict !== 'additive');
  if (report.combinations.length) {
    out.push('', `combinations: ${report.combinations.length - flagged.length} of ${report.combinations.length} pairs combine additively`);
    for (const c of flagged) out.push(`  ${c.a} + ${c.b}: interact in ${c.attribute} (${f2(c.attributeInteraction.value)} σ [${f2(c.attributeInteraction.low)}–${f2(c.attributeInteraction.high)}] beyond the sum at +${report.settings.referenceStrength})`);
  }
  if (report.directions.some((d) => d.targetChosen)) out.push('', '* no target named: the attribute the direction moves most');
  const first = report.directions[0];
  if (first) out.push('', `leakage: largest mean |Δ|/σ of a non-target attribute (attribute dependency); path length in ${first.pathLength.units}, ε = ${first.pathLength.epsilon} σ, 1st/99th-percentile filtered`);
  if (report.nullBaseline) out.push(`null pct: percentile of target effect / leak / end-point path length (at strength 0, the published end-point form) among ${report.nullBaseline.directions} random directions per layer rule (${report.nullBaseline.rules.join('; ')})`);
  if (report.referencePathLength) {
    const r = report.referencePathLength;
    out.push(`generator reference: ${r.form}: ${r.value.toPrecision(4)} [${r.low.toPrecision(4)}–${r.high.toPrecision(4)}] ${r.units} over ${r.samples} pairs`);
  }
  out.push('', 'rule:', ...report.verdictRule.map((l) => `  ${l}`));
  if (report.groundTruth) {
    const g = report.groundTruth;
    out.push('', `ground truth (${g.factors.length} declared factors, ${g.samples} samples): MIG ${g.mig ?? '—'}, DCI disentanglement ${g.dci.disentanglement}, completeness ${g.dci.completeness}, informativeness ${g.dci.informativeness}`);
  }
  for (const a of report.attributes.filter((x) => x.accuracy)) out.push('', `defined attribute ${a.name}: ${a.accuracy}`);
  for (const w of report.warnings) out.push('', `warning: ${w}`);
  out.push('', `probes: ${report.probes.count} at ψ ${report.probes.psi}; generator ${report.generator.name} (${report.generator.fingerprint.slice(0, 12)}…)`);
  out.push(`note: ${report.caution}`);
  return out.join('\n') + '\n';
}

export function addLabCommands(program: Command, ctx: CliContext, number: (n: string, lo: number, hi: number) => (v: string) => number, integer: (n: string, lo: number, hi: number) => (v: string) => number): void {
  program
    .command('discover')
    .description('find candidate directions (pca, sefa, boundary, means) and write them as .npy + .json')
    .option('-m, --model <file>', 'model card or .onnx; default: the bundled demo')
    .requiredOption('--method <name>', 'pca | sefa | boundary | means')
    .requiredOption('-o, --out <file.npy>', 'directions file to write (a .json sidecar is written beside it)')
    .option('-k, --components <n>', 'components to keep (pca, sefa)', integer('--components', 1, 4096), 8)
    .option('--samples <n>', 'random samples (pca, boundary)', integer('--samples', 16, 1_000_000), 4000)
    .option('--seed <n>', 'sampling seed', integer('--seed', 0, 0xffffffff), 1)
    .option('--layers <range>', 'W+ rows the directions apply to, e.g. 0-1 (pca, sefa)')
    .option('--attribute <name>', 'attribute to separate (boundary)')
    .option('--positive <seeds>', 'seeds tagged as having the attribute (means)')
    .option('--negative <seeds>', 'seeds tagged as lacking it (means)')
    .option('--name <name>', 'name for a boundary or means direction')
    .option('--threads <n>', 'inference threads', integer('--threads', 1, 256))
    .action(async (o) => {
      if (!['pca', 'sefa', 'boundary', 'means'].includes(o.method)) throw ctx.usage(`--method must be one of pca, sefa, boundary, means; got '${o.method}'`);
      if (o.method === 'boundary' && !o.attribute) throw ctx.usage('--method boundary needs --attribute <name>');
      if (o.method === 'means' && (!o.positive || !o.negative)) throw ctx.usage('--method means needs --positive <seeds> and --negative <seeds>');
      const workspace = await openWorkspace(o.model, o.threads);
      try {
        const gen = workspace.requireGenerator();
        const found = await runCliJob(ctx, workspace, 'discovering', 'discovery cancelled; nothing was written', (job) => discover(gen, {
          method: o.method,
          components: o.components,
          samples: o.samples,
          seed: o.seed,
          layers: parseLayers(o.layers, ctx.usage),
          attribute: o.attribute,
          positive: o.positive ? parseSeeds(o.positive) : [],
          negative: o.negative ? parseSeeds(o.negative) : [],
          name: o.name,
        }, job.checkpoint));
        if (!found) return;
        const files = writeDirections(resolve(o.out), found, gen.layout.space);
        const w = Math.max(9, ...found.map((d) => d.name.length));
        process.stdout.write(`${'direction'.padEnd(w)}  σ (latent units)  notes\n`);
        for (const d of found) process.stdout.write(`${d.name.padEnd(w)}  ${d.sigma.toFixed(4).padStart(16)}  ${d.notes}\n`);
        process.stdout.write(`wrote ${found.length} direction(s) to ${files.npy} and ${files.json}\n`);
      } finally {
        await workspace.dispose();
      }
    });

  program
    .command('audit')
    .description('audit directions for leakage, path length and safe range over a probe set')
    .option('-m, --model <file>', 'model card or .onnx; default: the bundled demo')
    .requiredOption('-d, --directions <file>', 'directions (.npy with optional .json sidecar)')
    .option('--only <names>', 'audit only these directions (comma-separated)')
    .option('--target <direction=attribute,…>', "audit a direction against another target for this audit only, e.g. crest_size=subject_radius (the direction file's own target otherwise)")
    .option('--probes <n>', `random probe latents, ${PROBE_LIMITS.min}–${PROBE_LIMITS.max} (with the --pin seeds and --pin-latents at least ${PROBE_LIMITS.minTotal} in all; 0 only with either)`, integer('--probes', PROBE_LIMITS.min, PROBE_LIMITS.max), 64)
    .option('--pin <seeds>', 'pinned probe seeds, e.g. 3,17,40-42')
    .option('--pin-latents <files>', 'latent .npy files pinned as probes beside the seeds, comma-separated (e.g. found.npy from plumbline locate, or a project\'s references/<name>.npy)')
    .option('--psi <number>', 'truncation ψ of the probes', number('--psi', 0, 2), 0.7)
    .option('--seed <n>', 'seed of probes, σ samples and bootstrap', integer('--seed', 0, 0xffffffff), 1)
    .option('--strengths <grid>', 'strength grid in σ units: from:to:step or a list', '-3:3:0.5')
    .option('--reference <s>', 'strength at which leakage is summarised (±)', number('--reference', 0.01, 20), 2)
    .option('--attributes <set>', 'default | card | image | all | a,b,c', 'default')
    .option('--pass <σ>', 'pass threshold for the leak, in σ of the leaked attribute (its upper 95% bound must be under it)', number('--pass', 0, 10), 0.2)
    .option('--fail <σ>', 'fail threshold for the leak, in σ (its lower 95% bound at or above it fails)', number('--fail', 0, 10), 0.5)
    .option('--distance <name>', 'path-length distance: ssim-lab | ssim | ciede2000 | l2 | features', 'ssim-lab')
    .option('--nulls <k>', 'random directions per layer rule for the null baseline (0 skips)', integer('--nulls', 0, 256), 16)
    .option('--scorer <card>', 'a scorer card (.json) for a user ONNX attribute model; repeatable', (v: string, prev: string[]) => [...prev, v], [] as string[])
    .option('--feature-scorer <card>', "scorer card whose features output serves the 'features' distance")
    .option('--define <tags.json>', 'define attributes from a tags file first and audit with them (refused below the accuracy floor)')
    .option('--defined <file|project>', 'a defined-attribute file, or a project folder with attributes/; repeatable', (v: string, prev: string[]) => [...prev, v], [] as string[])
    .option('--combinations <which>', 'all | none', 'all')
    .option('--resamples <n>', 'bootstrap resamples', integer('--resamples', 200, 100_000), 1000)
    .option('--json <file>', 'write the full report as JSON')
    .option('--threads <n>', 'inference threads', integer('--threads', 1, 256))
    .option('--farm <url>', 'render and score on a farm: redis://[user:password@]host:port[/db] (password: PLUMBLINE_FARM_PASSWORD; workers: plumbline worker)')
    .option('--no-publish-model', 'on a farm, do not publish the generator files through Redis (workers read them from shared storage)')
    .action(async (o) => {
      if (o.farm && (o.scorer.length || o.featureScorer)) throw ctx.usage('--farm audits built-in attributes only; leave out --scorer and --feature-scorer, or audit on this machine');
      if (!['ssim-lab', 'ssim', 'ciede2000', 'l2', 'features'].includes(o.distance)) throw ctx.usage(`--distance must be ssim-lab, ssim, ciede2000, l2 or features; got '${o.distance}'`);
      if (o.distance === 'features' && !o.featureScorer) throw ctx.usage("--distance features needs --feature-scorer <card>");
      if (!['all', 'none'].includes(o.combinations)) throw ctx.usage(`--combinations must be all or none; got '${o.combinations}'`);
      if (o.pass >= o.fail) throw ctx.usage(`--pass (${o.pass}) must be below --fail (${o.fail})`);
      // The range stated in --help is the range accepted: checked here, before any work starts.
      const pinned = o.pin ? parseSeeds(o.pin) : [];
      const latentFiles = o.pinLatents ? String(o.pinLatents).split(',').filter(Boolean).length : 0;
      if (o.probes + pinned.length + latentFiles < PROBE_LIMITS.minTotal) throw ctx.usage(`--probes ${o.probes} with ${pinned.length} --pin seed(s) and ${latentFiles} --pin-latents file(s) makes ${o.probes + pinned.length + latentFiles} probe(s); an audit needs at least ${PROBE_LIMITS.minTotal} in all (--probes ${PROBE_LIMITS.min}–${PROBE_LIMITS.max}, 0 only with --pin or --pin-latents)`);
      const workspace = await openWorkspace(o.model, o.threads);
      const scorers: ScorerModel[] = [];
      let farm: Farm | null = null;
      let progress: RunProgress | null = null;
      try {
        for (const c of o.scorer as string[]) scorers.push(await ScorerModel.open(c, { threads: o.threads }));
        const features = o.featureScorer ? await ScorerModel.open(o.featureScorer, { threads: o.threads }) : undefined;
        if (features) scorers.push(features);
        const loaded = loadDirections(workspace, o.directions, o.only ? String(o.only).split(',') : undefined);
        // --target crest_size=subject_radius,turn=orientation: targets for this audit only.
        const targets = new Map<string, string>();
        for (const pair of o.target ? String(o.target).split(',').filter(Boolean) : []) {
          const m = /^([^=]+)=([^=]+)$/.exec(pair.trim());
          if (!m) throw ctx.usage(`--target '${pair}' must look like direction=attribute, e.g. crest_size=subject_radius`);
          if (!loaded.some((d) => d.name === m[1])) throw ctx.usage(`--target names no audited direction '${m[1]}'; audited: ${loaded.map((d) => d.name).join(', ')}`);
          targets.set(m[1], m[2]);
        }
        const dirs = loaded.map((d) => (targets.has(d.name) ? { ...d, target: targets.get(d.name)! } : d));
        const defined: DefinedAttribute[] = (o.defined as string[]).flatMap((p) => (p.endsWith('.json') ? [DefinedAttribute.load(p)] : loadProjectAttributes(p)));
        if (o.define) {
          const r = await defineFromTagsFile(workspace.requireGenerator(), o.define, { psi: o.psi, seed: o.seed });
          if (r.refused.length) {
            process.stderr.write(`plumbline: not auditing: ${r.refused.map((x) => x.name).join(', ')} refused below the accuracy floor (see above)\n`);
            process.exitCode = 1;
            return;
          }
          defined.push(...r.accepted);
        }
        const attributes = ['default', 'card', 'image', 'all'].includes(o.attributes) ? o.attributes : String(o.attributes).split(',');
        const gen = workspace.requireGenerator();
        farm = o.farm ? await Farm.connect(o.farm, farmPassword()) : null;
        const idle = farm ? await farm.noWorkersWarning() : null;
        if (idle) process.stderr.write(`warning: ${idle}\n`);
        const measure = farm ? farmAuditMeasurer(farm, attributes, { fingerprint: gen.info.fingerprint, files: gen.info.files, modelPath: resolve(o.model ?? demoCardPath()), publish: o.publishModel, isCancelled: () => ctx.interrupt.aborted, onProgress: (p) => (progress = p), onNote: (line) => process.stderr.write(`farm: ${line}\n`) }) : undefined;
        const steps = runAudit(gen, dirs, {
          probes: o.probes,
          pinnedSeeds: pinned,
          psi: o.psi,
          seed: o.seed,
          strengths: parseGrid(o.strengths, ctx.usage),
          referenceStrength: o.reference,
          attributes,
          leakPass: o.pass,
          leakFail: o.fail,
          pathLength: { distance: o.distance, epsilon: 0.01, spikeRatio: 5 },
          nullDirections: o.nulls,
          combinations: o.combinations,
          bootstrapResamples: o.resamples,
          scorerCards: (o.scorer as string[]).map((c) => resolve(c)),
          featureScorer: o.featureScorer ? resolve(o.featureScorer) : null,
        }, { scorers: scorers.filter((x) => x !== features), features, defined, measure, references: o.pinLatents ? readPinnedLatents(String(o.pinLatents), workspace.requireGenerator().layout) : [] });
        const report = await runCliJob(ctx, workspace, 'auditing', 'audit cancelled; nothing was written', (job) => driveSteps(steps, job));
        if (progress) process.stderr.write(farmSummary(progress));
        if (!report) return;
        process.stdout.write(auditTable(report));
        if (o.json) {
          writeFileAtomic(resolve(o.json), JSON.stringify(auditReportFile(report), null, 2) + '\n');
          process.stdout.write(`wrote ${resolve(o.json)}\n`);
        }
      } finally {
        await farm?.close();
        for (const sc of scorers) await sc.dispose();
        await workspace.dispose();
      }
    });

  program
    .command('repair')
    .description('project a direction off the boundaries of chosen attributes (optionally holding others)')
    .option('-m, --model <file>', 'model card or .onnx; default: the bundled demo')
    .requiredOption('-d, --directions <file>', 'directions file holding the direction')
    .requiredOption('--direction <name>', 'the direction to repair')
    .requiredOption('--against <attributes>', 'attributes to remove, comma-separated')
    .option('--hold <attributes>', "attributes whose response must not change, comma-separated, or 'others' for every other attribute")
    .option('--layers <range>', 'W+ rows the repaired direction applies to')
    .option('--samples <n>', 'random samples for the boundaries', integer('--samples', 100, 1_000_000), 4000)
    .option('--seed <n>', 'sampling seed', integer('--seed', 0, 0xffffffff), 1)
    .requiredOption('-o, --out <file.npy>', 'where to write the repaired direction')
    .option('--threads <n>', 'inference threads', integer('--threads', 1, 256))
    .action(async (o) => {
      const workspace = await openWorkspace(o.model, o.threads);
      try {
        const [d] = loadDirections(workspace, o.directions, [o.direction]);
        const gen = workspace.requireGenerator();
        const hold = o.hold === 'others' ? 'others' : o.hold ? String(o.hold).split(',') : [];
        const result = await runCliJob(ctx, workspace, 'repairing', 'repair cancelled; nothing was written', (job) => repairInWorkspace(workspace, {
          direction: d.id, against: String(o.against).split(',').filter(Boolean), hold, samples: o.samples, seed: o.seed, layers: o.layers ? parseLayers(o.layers, ctx.usage) : undefined,
        }, job.checkpoint));
        if (!result) return;
        const repaired = { ...result.entry, boundaries: result.boundaries };
        const files = writeDirections(resolve(o.out), [repaired], gen.layout.space);
        let cos = 0;
        for (let i = 0; i < d.vector.length; i++) cos += d.vector[i] * repaired.vector[i];
        process.stdout.write(`${repaired.name}: ${repaired.notes}\n`);
        for (const b of repaired.boundaries) process.stdout.write(`  boundary ${b.attribute.padEnd(14)} ${b.role.padEnd(8)} held-out accuracy ${(b.accuracy * 100).toFixed(1)}%\n`);
        process.stdout.write(`  angle to the original: ${((Math.acos(Math.min(1, cos)) * 180) / Math.PI).toFixed(1)}°\nwrote ${files.npy} and ${files.json}; audit it with: plumbline audit -d ${files.npy}\n`);
      } finally {
        await workspace.dispose();
      }
    });
}
