// The audit: how much each direction leaks into every other attribute, over a probe set, across a
// strength grid, with perceptual path length, a safe range, bootstrap intervals and a verdict in
// words. Runs as a job: an async generator yielding progress between batches (cancel = stop
// pulling). Each probe's unedited image is rendered and scored once for the whole audit; per-probe
// data kept is a handful of numbers per direction and attribute, never images.
import { PlumblineError } from '../core/errors.ts';
import { applyEdits } from '../core/latent.ts';
import { downsampleImage, encodePng, type RgbaImage } from '../core/image.ts';
import { ProbeBootstrap, RunningMoments } from '../core/stats.ts';
import { AUDIT_CAUTION, MIN_USEFUL_PROBES, auditSettingsSchema, type AuditSettings } from '../core/audit/settings.ts';
import { DISTANCE_EXPONENT, imageDistance, type ImageLayout, type PathDistance } from '../core/audit/path-length.ts';
import { attributeDelta, resolveAttributes, scoreBatch } from './attributes.ts';
import type { Generator } from './generator.ts';
import type { ScorerModel } from './scorer-model.ts';
import type { DefinedAttribute } from './defined-attributes.ts';
import { SsimDistanceModel } from './distance-model.ts';
import { groundTruthMetrics } from './lab.ts';

export interface AuditDirection {
  name: string;
  target: string | null;
  layers: [number, number] | null;
  vector: Float32Array;
  sigma: number;
}

export interface Interval {
  value: number;
  low: number;
  high: number;
}

export interface DirectionReport {
  name: string;
  target: string;
  targetChosen: boolean;
  verdict: 'pass' | 'review' | 'fail';
  reason: string;
  targetEffect: Interval;
  dependency: Record<string, Interval>;
  leakage: Interval & { strength: number; attribute: string };
  pathLength: Interval & { distance: string; epsilon: number; exponent: number };
  safeRange: [number, number];
  breaksAt: number | null;
  curves: { strengths: number[]; attributes: Record<string, { mean: number[]; low: number[]; high: number[] }> };
  leakageCurve: (number | null)[];
  pathLengthCurve: { strengths: number[]; mean: number[]; low: number[]; high: number[] };
  worstProbes: { seed: number; strength: number; attribute: string; leakage: number; before: string; after: string }[];
}

export interface CombinationReport {
  a: string;
  b: string;
  attribute: string;
  /** Largest non-additivity |a(both) − a(i) − a(j) + a(base)| / σ_a at +reference strength, mean over probes. */
  attributeInteraction: Interval;
  /** RMS of the mixed finite difference of images (METHODS §2.4) at ε = 1 σ, in image range units. */
  imageInteraction: Interval;
  verdict: 'additive' | 'interacts';
}

export interface AuditReport {
  format: 'plumbline.audit';
  version: 1;
  createdAt: string;
  tool: string;
  generator: { name: string; fingerprint: string };
  settings: AuditSettings;
  probes: { count: number; pinned: number[]; firstSeed: number; psi: number };
  /** `accuracy`: a defined attribute's cross-validated accuracy, in words (it goes wherever the attribute is used). */
  attributes: { name: string; unit: string; source: string; sigma: number; accuracy?: string }[];
  warnings: string[];
  caution: string;
  directions: DirectionReport[];
  combinations: CombinationReport[];
  /** MIG and DCI of the audited set against the generator's declared factors, when it declares any. */
  groundTruth: Awaited<ReturnType<typeof groundTruthMetrics>>;
}

export interface AuditProgress {
  done: number;
  total: number;
  label: string;
}

/** Probe seeds start here so they differ from the seeds a user browses first. */
const PROBE_SEED_BASE = 0x70000000;
const SIGMA_SEED_BASE = 0x60000000;
/** Non-additivity below this (in σ of the attribute) counts as additive. */
const ADDITIVE_LIMIT = 0.15;
/** Combination checks run on at most this many probes (4 extra renders per pair and probe). */
const PAIR_PROBES = 32;
const THUMB = 48;

export interface AuditModels {
  /** User ONNX scorers whose attributes join the audit. */
  scorers?: ScorerModel[];
  /** Feature model for the 'features' path-length distance. */
  features?: ScorerModel;
  /** Attributes the lead defined from tagged seeds. */
  defined?: DefinedAttribute[];
}

export async function* runAudit(gen: Generator, directions: AuditDirection[], rawSettings: Partial<AuditSettings> = {}, models: AuditModels = {}): AsyncGenerator<AuditProgress, AuditReport, void> {
  const settings = auditSettingsSchema.parse(rawSettings);
  if (settings.pathLength.distance === 'features' && !models.features) throw new PlumblineError('bad-request', "the 'features' path-length distance needs a scorer card with a features output (--feature-scorer)");
  if (directions.length === 0) throw new PlumblineError('bad-request', 'no directions to audit');
  const per = gen.layout.layers * gen.layout.size;
  for (const d of directions) {
    if (d.vector.length !== gen.layout.size && d.vector.length !== per) {
      throw new PlumblineError('latent-size-mismatch', `direction '${d.name}' has ${d.vector.length} values; this generator's latent size is ${gen.layout.size}`);
    }
  }
  const specs = resolveAttributes(gen, settings.attributes, models.scorers ?? [], models.defined ?? []);
  const names = specs.map((s) => s.name);
  for (const d of directions) {
    if (d.target && !names.includes(d.target)) throw new PlumblineError('bad-request', `direction '${d.name}' targets unknown attribute '${d.target}'; audited attributes: ${names.join(', ')}`);
  }
  const seeds = [...settings.pinnedSeeds, ...Array.from({ length: settings.probes }, (_, i) => PROBE_SEED_BASE + settings.seed * 100_003 + i)];
  if (seeds.length === 0) throw new PlumblineError('bad-request', 'the probe set is empty: ask for --probes N or pin some seeds');
  if (seeds.length < 2) throw new PlumblineError('bad-request', 'an audit needs at least 2 probes for any interval');
  const warnings: string[] = [];
  if (seeds.length < MIN_USEFUL_PROBES) warnings.push(`only ${seeds.length} probes: intervals will be wide and the verdicts unreliable; use at least ${MIN_USEFUL_PROBES} (100 or more before sign-off)`);

  const grid = [...new Set([...settings.strengths, 0])].sort((a, b) => a - b);
  const ref = settings.referenceStrength;
  if (!grid.includes(ref) || !grid.includes(-ref)) throw new PlumblineError('bad-request', `the strength grid must contain ±${ref} (the reference strength)`);
  const pplGrid = grid.filter((t) => Number.isInteger(t));
  const eps = settings.pathLength.epsilon;
  const distance = settings.pathLength.distance;
  // Squared feature distances are quadratic for small steps, like LPIPS: exponent 2.
  const exponent = distance === 'features' ? 2 : DISTANCE_EXPONENT[distance];
  const batch = gen.batchSize;
  const n = seeds.length;
  let K = specs.length;
  const pairs = choosePairs(directions, settings.combinations);
  const pairProbes = Math.min(n, PAIR_PROBES);

  const batches = Math.ceil(n / batch);
  const sigmaBatches = Math.ceil(settings.sigmaSamples / batch);
  const total = sigmaBatches + batches + directions.length * (grid.length - 1 + pplGrid.length) * batches + pairs.length * Math.ceil(pairProbes / batch) * 5;
  let done = 0;
  const tick = (label: string): AuditProgress => ({ done: ++done, total, label });

  // 1. Attribute spread over a separate random sample (ψ = 1).
  const sigmaStats = specs.map(() => new RunningMoments());
  const sigmaSeeds = Array.from({ length: settings.sigmaSamples }, (_, i) => SIGMA_SEED_BASE + settings.seed * 100_003 + i);
  const circularRef: number[] = [];
  for (let at = 0; at < sigmaSeeds.length; at += batch) {
    const out = await gen.renderSeeds(sigmaSeeds.slice(at, at + batch), 1, []);
    const s = await scoreBatch(gen, out, specs);
    for (let i = 0; i < out.n; i++)
      for (let j = 0; j < K; j++) {
        // Circular attributes: spread of the wrapped difference from the first sample.
        if (specs[j].period) {
          if (circularRef[j] === undefined) circularRef[j] = s[j];
          sigmaStats[j].push(attributeDelta(circularRef[j], s[i * K + j], specs[j].period));
        } else sigmaStats[j].push(s[i * K + j]);
      }
    yield tick('measuring attribute spread');
  }
  let sigma = sigmaStats.map((m) => m.std);
  const zero = specs.filter((_, j) => !(sigma[j] > 1e-12)).map((s) => s.name);
  if (zero.length) {
    const problem = `attribute(s) ${zero.join(', ')} do not vary over ${settings.sigmaSamples} random samples (zero variance), so changes cannot be normalised`;
    // Asked for by name: an error. Part of a default set: left out, and the report says so.
    if (Array.isArray(settings.attributes) || specs.length === zero.length) throw new PlumblineError('bad-request', `${problem}; leave them out with --attributes`);
    warnings.push(`${problem}; they were left out of this audit (more --sigma samples may reveal rare variation)`);
    const keep = specs.map((_, j) => j).filter((j) => sigma[j] > 1e-12);
    specs.splice(0, specs.length, ...keep.map((j) => specs[j]));
    names.splice(0, names.length, ...specs.map((x) => x.name));
    sigma = keep.map((j) => sigma[j]);
    for (const d of directions) {
      if (d.target && !names.includes(d.target)) throw new PlumblineError('bad-request', `direction '${d.name}' targets ${d.target}, which does not vary over the random samples`);
    }
  }

  K = specs.length;

  // 2. Probes: codes and unedited scores, once for the whole audit.
  const probeCodes = await gen.codesForSeeds(seeds, settings.psi);
  const baseScores = new Float64Array(n * K);
  for (let at = 0; at < n; at += batch) {
    const m = Math.min(batch, n - at);
    const out = await gen.synthesize(probeCodes.slice(at * per, (at + m) * per), m);
    baseScores.set((await scoreBatch(gen, out, specs)), at * K);
    yield tick('rendering probes');
  }
  const { width, height } = gen.imageSize();
  const geometry: ImageLayout = { width, height, layout: gen.imageLayout, range: gen.range };
  const bootstrap = new ProbeBootstrap(n, settings.bootstrapResamples, settings.seed);
  const ssimModel = distance === 'ssim' && Math.min(width, height) >= 11 ? await SsimDistanceModel.create(height, width, gen.range, 1) : null;
  try {

  const editCodes = (at: number, m: number, d: AuditDirection, s: number, extra: { d: AuditDirection; s: number }[] = []) => {
    const codes = probeCodes.slice(at * per, (at + m) * per);
    applyEdits(codes, gen.layout, [{ vector: d.vector, layers: d.layers, step: s * d.sigma }, ...extra.map((e) => ({ vector: e.d.vector, layers: e.d.layers, step: e.s * e.d.sigma }))]);
    return codes;
  };

  const reports: DirectionReport[] = [];
  /** Each direction's scores at +reference strength, for the combination check. */
  const scoresAtRefByName = new Map<string, Float64Array>();
  for (const d of directions) {
    // Streaming accumulators: per strength and attribute, signed and absolute normalised change.
    const signed = grid.map(() => specs.map(() => new RunningMoments()));
    const absolute = grid.map(() => specs.map(() => new RunningMoments()));
    // Per-probe |Δ|/σ at ±ref for the bootstrap: [sign][attribute] columns of length n; signed Δ/σ at +ref.
    const refAbs = [0, 1].map(() => specs.map(() => new Float64Array(n)));
    const refSigned = specs.map(() => new Float64Array(n));
    const scoresAtRef = new Float64Array(n * K);
    const ppl = pplGrid.map(() => new RunningMoments());
    const pplPerProbe = new Float64Array(n);
    const pplCountPerProbe = new Uint16Array(n);
    const worst: { seed: number; strength: number; attribute: string; leakage: number; index: number }[] = [];

    for (let gi = 0; gi < grid.length; gi++) {
      const s = grid[gi];
      const pi = pplGrid.indexOf(s);
      if (s === 0 && pi < 0) continue;
      for (let at = 0; at < n; at += batch) {
        const m = Math.min(batch, n - at);
        const out = await gen.synthesize(editCodes(at, m, d, s), m);
        if (s !== 0) {
          const sc = await scoreBatch(gen, out, specs);
          for (let i = 0; i < m; i++) {
            const p = at + i;
            for (let j = 0; j < K; j++) {
              const delta = attributeDelta(baseScores[p * K + j], sc[i * K + j], specs[j].period) / sigma[j];
              signed[gi][j].push(delta);
              absolute[gi][j].push(Math.abs(delta));
              if (s === ref) {
                refAbs[0][j][p] = Math.abs(delta);
                refSigned[j][p] = delta;
                scoresAtRef[p * K + j] = sc[i * K + j];
              } else if (s === -ref) refAbs[1][j][p] = Math.abs(delta);
            }
          }
          yield tick(`auditing ${d.name} at ${fmt(s)}`);
        }
        if (pi >= 0) {
          // Path length: the same batch one ε further along the direction.
          const next = await gen.synthesize(editCodes(at, m, d, s + eps), m);
          const feats = distance === 'features' ? await Promise.all([out, next].map((o) => models.features!.features(Array.from({ length: m }, (_, i) => gen.toRgba(o.images, i))))) : null;
          // SSIM runs natively in the engine (same definition as the JS reference, checked in tests).
          const ssimBatch = ssimModel && geometry.layout === 'NCHW' ? await ssimModel.distances(out.images, next.images, m) : null;
          for (let i = 0; i < m; i++) {
            const raw = feats ? featureDistance(feats[0], feats[1], i) : ssimBatch ? ssimBatch[i] : imageDistance(distance as PathDistance, out.images, i, next.images, i, geometry);
            const v = raw / eps ** exponent;
            ppl[pi].push(v);
            if (Math.abs(s) <= ref) {
              pplPerProbe[at + i] += v;
              pplCountPerProbe[at + i]++;
            }
          }
          yield tick(`path length of ${d.name} at ${fmt(s)}`);
        }
      }
    }
    for (let p = 0; p < n; p++) pplPerProbe[p] /= Math.max(1, pplCountPerProbe[p]);

    // Target: declared, or the attribute this direction moves most at +ref.
    const refIndex = grid.indexOf(ref);
    let target = d.target ? names.indexOf(d.target) : -1;
    const targetChosen = target < 0;
    if (targetChosen) target = absolute[refIndex].reduce((best, m, j) => (m.mean > absolute[refIndex][best].mean ? j : best), 0);
    const others = specs.map((_, j) => j).filter((j) => j !== target);

    // Leakage along the grid (point estimates from the streaming means).
    const leakageCurve = grid.map((s, gi) => {
      if (s === 0) return null;
      const t = absolute[gi][target].mean;
      if (!(t > 1e-9)) return Infinity;
      return Math.max(0, ...others.map((j) => absolute[gi][j].mean)) / t;
    });
    const pplMeans = ppl.map((m) => m.mean);
    const calm = pplGrid.map((t, i) => (Math.abs(t) <= 1 ? pplMeans[i] : NaN)).filter(Number.isFinite);
    const calmMedian = calm.length ? [...calm].sort((a, b) => a - b)[Math.floor(calm.length / 2)] : NaN;
    const spikeAt = (s: number) => {
      const i = pplGrid.indexOf(s);
      return i >= 0 && calmMedian > 0 && pplMeans[i] > settings.pathLength.spikeRatio * calmMedian;
    };
    // Safe range: widest interval around 0 where leakage stays under the pass threshold and path length does not spike.
    const safeSide = (sign: 1 | -1) => {
      let edge = 0;
      for (const s of grid.filter((x) => x * sign > 0).sort((a, b) => Math.abs(a) - Math.abs(b))) {
        const l = leakageCurve[grid.indexOf(s)]!;
        if (!(l < settings.leakPass) || spikeAt(s)) break;
        edge = s;
      }
      return edge;
    };
    const safeRange: [number, number] = [safeSide(-1), safeSide(1)];
    // Breaking: behaviour that changes along the slider — a path-length spike, or leakage that
    // starts clean and crosses the fail threshold further out (a direction leaky from the start
    // is leaky, not broken).
    const breaksAt = (() => {
      const positive = grid.filter((x) => x > 0);
      const cleanStart = leakageCurve[grid.indexOf(positive[0])]! < settings.leakPass;
      for (const s of positive) if (spikeAt(s) || (cleanStart && !(leakageCurve[grid.indexOf(s)]! < settings.leakFail))) return s;
      return null;
    })();

    // Intervals (joint bootstrap over probes).
    const leakStat = (sign: 0 | 1) => {
      const cols = [refAbs[sign][target], ...others.map((j) => refAbs[sign][j])];
      return bootstrap.interval(cols, (mns) => {
        const t = mns[0];
        let worstDep = 0;
        for (let k = 1; k < mns.length; k++) worstDep = Math.max(worstDep, mns[k]);
        return t > 1e-12 ? worstDep / t : Infinity;
      });
    };
    const plus = leakStat(0);
    const minus = leakStat(1);
    const worseSign = plus.value >= minus.value ? 0 : 1;
    const leakInterval = worseSign === 0 ? plus : minus;
    const leakAttr = others.reduce((b, j) => (refAbs[worseSign][j].reduce((x, y) => x + y, 0) > refAbs[worseSign][b]?.reduce((x, y) => x + y, 0) ? j : b), others[0] ?? target);
    const dependency: Record<string, Interval> = {};
    for (let j = 0; j < K; j++) dependency[names[j]] = round(bootstrap.interval([refAbs[worseSign][j]], (mns) => mns[0]));
    const targetEffect = round(bootstrap.interval([refSigned[target]], (mns) => mns[0]));
    const pathLength = round(bootstrap.interval([pplPerProbe], (mns) => mns[0]));

    // Worst probes at the worse reference sign: largest leak relative to the target change.
    for (let p = 0; p < n; p++) {
      const t = Math.max(refAbs[worseSign][target][p], 1e-9);
      let bj = others[0] ?? target;
      for (const j of others) if (refAbs[worseSign][j][p] > refAbs[worseSign][bj][p]) bj = j;
      worst.push({ seed: seeds[p], strength: worseSign === 0 ? ref : -ref, attribute: names[bj], leakage: refAbs[worseSign][bj][p] / t, index: p });
    }
    worst.sort((a, b) => b.leakage - a.leakage);
    const worstProbes = [];
    for (const w of worst.slice(0, settings.worstProbes)) {
      const before = await gen.synthesize(probeCodes.slice(w.index * per, (w.index + 1) * per), 1);
      const after = await gen.synthesize(editCodes(w.index, 1, d, w.strength), 1);
      worstProbes.push({ seed: w.seed, strength: w.strength, attribute: w.attribute, leakage: r4(w.leakage), before: thumbnail(gen.toRgba(before.images, 0)), after: thumbnail(gen.toRgba(after.images, 0)) });
    }

    const curves: DirectionReport['curves'] = { strengths: grid, attributes: {} };
    specs.forEach((spec, j) => {
      const mean: number[] = [];
      const low: number[] = [];
      const high: number[] = [];
      grid.forEach((s, gi) => {
        if (s === 0) return void (mean.push(0), low.push(0), high.push(0));
        const [lo, hi] = signed[gi][j].interval();
        mean.push(r4(signed[gi][j].mean));
        low.push(r4(lo));
        high.push(r4(hi));
      });
      curves.attributes[spec.name] = { mean, low, high };
    });
    const pathLengthCurve = { strengths: pplGrid, mean: ppl.map((m) => r4(m.mean)), low: ppl.map((m) => r4(m.interval()[0])), high: ppl.map((m) => r4(m.interval()[1])) };

    const leakage = { ...round(leakInterval), strength: worseSign === 0 ? ref : -ref, attribute: names[leakAttr] };
    const { verdict, reason } = judge({ name: d.name, leakage, safeRange, breaksAt, ref, settings, targetName: names[target], targetChosen, spike: pplGrid.filter((s) => spikeAt(s)), pplMeans, pplGrid, calmMedian, targetEffect, fewProbes: n < MIN_USEFUL_PROBES });
    reports.push({
      name: d.name,
      target: names[target],
      targetChosen,
      verdict,
      reason,
      targetEffect,
      dependency,
      leakage,
      pathLength: { ...pathLength, distance, epsilon: eps, exponent },
      safeRange,
      breaksAt,
      curves,
      leakageCurve: leakageCurve.map((l) => (l === null ? null : Number.isFinite(l) ? r4(l) : null)),
      pathLengthCurve,
      worstProbes,
    });
    scoresAtRefByName.set(d.name, scoresAtRef);
  }

  // 3. Combination check for pairs: additivity of attribute changes and the images' mixed difference.
  const combinations: CombinationReport[] = [];
  for (const [a, b] of pairs) {
    const atRefA = scoresAtRefByName.get(a.name)!;
    const atRefB = scoresAtRefByName.get(b.name)!;
    const attrCols = specs.map(() => new Float64Array(pairProbes));
    const imageCol = new Float64Array(pairProbes);
    for (let at = 0; at < pairProbes; at += batch) {
      const m = Math.min(batch, pairProbes - at);
      const both = await gen.synthesize(editCodes(at, m, a, ref, [{ d: b, s: ref }]), m);
      const sc = await scoreBatch(gen, both, specs);
      for (let i = 0; i < m; i++) {
        const p = at + i;
        for (let j = 0; j < K; j++) {
          const base = baseScores[p * K + j];
          const da = attributeDelta(base, atRefA[p * K + j], specs[j].period);
          const db = attributeDelta(base, atRefB[p * K + j], specs[j].period);
          const dab = attributeDelta(base, sc[i * K + j], specs[j].period);
          attrCols[j][p] = Math.abs(dab - da - db) / sigma[j];
        }
      }
      yield tick(`combining ${a.name} + ${b.name}`);
      const e = 1;
      const pp = await gen.synthesize(editCodes(at, m, a, e, [{ d: b, s: e }]), m);
      yield tick(`combining ${a.name} + ${b.name}`);
      const pm = await gen.synthesize(editCodes(at, m, a, e, [{ d: b, s: -e }]), m);
      yield tick(`combining ${a.name} + ${b.name}`);
      const mp = await gen.synthesize(editCodes(at, m, a, -e, [{ d: b, s: e }]), m);
      yield tick(`combining ${a.name} + ${b.name}`);
      const mm = await gen.synthesize(editCodes(at, m, a, -e, [{ d: b, s: -e }]), m);
      yield tick(`combining ${a.name} + ${b.name}`);
      const size = 3 * width * height;
      for (let i = 0; i < m; i++) {
        let s2 = 0;
        for (let k = 0; k < size; k++) {
          const v = (pp.images[i * size + k] - pm.images[i * size + k] - mp.images[i * size + k] + mm.images[i * size + k]) / (4 * e * e);
          s2 += v * v;
        }
        imageCol[at + i] = Math.sqrt(s2 / size);
      }
    }
    const pairBoot = new ProbeBootstrap(pairProbes, settings.bootstrapResamples, settings.seed + 1);
    let worstJ = 0;
    const means = attrCols.map((c) => c.reduce((x, y) => x + y, 0) / pairProbes);
    means.forEach((v, j) => v > means[worstJ] && (worstJ = j));
    const attributeInteraction = round(pairBoot.interval([attrCols[worstJ]], (mns) => mns[0]));
    combinations.push({
      a: a.name,
      b: b.name,
      attribute: names[worstJ],
      attributeInteraction,
      imageInteraction: round(pairBoot.interval([imageCol], (mns) => mns[0])),
      verdict: attributeInteraction.value < ADDITIVE_LIMIT ? 'additive' : 'interacts',
    });
  }

  const groundTruth = settings.groundTruthSamples > 0 && gen.attributeNames.length ? await groundTruthMetrics(gen, directions, settings.groundTruthSamples, settings.seed) : null;

  return {
    format: 'plumbline.audit',
    version: 1,
    createdAt: new Date().toISOString(),
    tool: 'plumbline 0.1.0',
    generator: { name: gen.info.name, fingerprint: gen.info.fingerprint },
    settings,
    probes: { count: n, pinned: settings.pinnedSeeds, firstSeed: seeds[settings.pinnedSeeds.length] ?? seeds[0], psi: settings.psi },
    attributes: specs.map((s, j) => ({ name: s.name, unit: s.unit, source: s.source, sigma: r4(sigma[j], 6), ...(s.defined ? { accuracy: s.defined.accuracy } : {}) })),
    warnings,
    caution: AUDIT_CAUTION,
    directions: reports,
    combinations,
    groundTruth,
  };
  } finally {
    // Released however the audit ends: finished, cancelled (return()) or failed.
    await ssimModel?.dispose();
  }
}

function judge(x: {
  name: string;
  leakage: Interval & { strength: number; attribute: string };
  safeRange: [number, number];
  breaksAt: number | null;
  ref: number;
  settings: AuditSettings;
  targetName: string;
  targetChosen: boolean;
  spike: number[];
  pplMeans: number[];
  pplGrid: number[];
  calmMedian: number;
  targetEffect: Interval;
  fewProbes: boolean;
}): { verdict: DirectionReport['verdict']; reason: string } {
  const { leakage: L, settings: S, ref } = x;
  const parts: string[] = [];
  const at = `at strength ${fmt(L.strength)}`;
  const leakText = `leaks into ${L.attribute}: ${L.value.toFixed(2)} of the target effect ${at} (95% CI ${L.low.toFixed(2)}–${L.high.toFixed(2)})`;
  const covers = x.safeRange[0] <= -ref && x.safeRange[1] >= ref;
  let verdict: DirectionReport['verdict'];
  if (!(Math.abs(x.targetEffect.value) > 0.05)) {
    verdict = 'fail';
    parts.push(`barely moves its target ${x.targetName} (${x.targetEffect.value.toFixed(2)} σ at ${fmt(ref)})`);
  } else if (L.value >= S.leakFail) {
    verdict = 'fail';
    parts.push(leakText);
  } else if (L.value < S.leakPass && covers && L.high < S.leakFail) {
    verdict = 'pass';
    parts.push(`clean within ±${ref}: largest leak ${L.value.toFixed(2)} (${L.attribute}) of the target effect`);
  } else {
    verdict = 'review';
    parts.push(L.value >= S.leakPass ? leakText : `largest leak ${L.value.toFixed(2)} (${L.attribute}) but the interval reaches ${L.high.toFixed(2)}`);
  }
  if (x.breaksAt !== null && x.breaksAt <= ref + 1) {
    const spikeText = x.spike.length ? `; path length spikes ×${(x.pplMeans[x.pplGrid.indexOf(x.spike[0])] / x.calmMedian).toFixed(1)} at ${fmt(x.spike[0])}` : '';
    parts.push(`breaks from ${fmt(x.breaksAt)}${spikeText}`);
    if (verdict === 'pass') verdict = 'review';
  }
  if (!covers) parts.push(`safe range ${fmt(x.safeRange[0])} to ${fmt(x.safeRange[1])}`);
  if (x.targetChosen) parts.push(`no target was named; took ${x.targetName}, the attribute it moves most`);
  if (x.fewProbes && verdict === 'pass') {
    verdict = 'review';
    parts.push('too few probes to pass');
  }
  return { verdict, reason: parts.join('; ') };
}

function choosePairs(directions: AuditDirection[], which: AuditSettings['combinations']): [AuditDirection, AuditDirection][] {
  if (which === 'none' || directions.length < 2) return [];
  if (which === 'all') {
    const ds = directions.slice(0, 12);
    const out: [AuditDirection, AuditDirection][] = [];
    for (let i = 0; i < ds.length; i++) for (let j = i + 1; j < ds.length; j++) out.push([ds[i], ds[j]]);
    return out;
  }
  return which.map(([a, b]) => {
    const da = directions.find((d) => d.name === a);
    const db = directions.find((d) => d.name === b);
    if (!da || !db) throw new PlumblineError('bad-request', `combination ${a} + ${b}: unknown direction`);
    return [da, db];
  });
}

/** Squared L2 distance between feature vectors i of two batches (LPIPS-style, without learned weights). */
function featureDistance(a: { data: Float32Array; width: number }, b: { data: Float32Array; width: number }, i: number): number {
  let s = 0;
  for (let k = 0; k < a.width; k++) s += (a.data[i * a.width + k] - b.data[i * b.width + k]) ** 2;
  return s;
}

function thumbnail(img: RgbaImage): string {
  const small = downsampleImage(img, img.width / THUMB);
  return `data:image/png;base64,${Buffer.from(encodePng(small)).toString('base64')}`;
}

/** Six significant digits: enough for any reading, small values keep their precision. */
const r4 = (v: number, digits = 6) => (Number.isFinite(v) ? Number(v.toPrecision(digits)) : v);
const round = (i: Interval): Interval => ({ value: r4(i.value), low: r4(i.low), high: r4(i.high) });
const fmt = (s: number) => (s > 0 ? `+${s}` : `${s}`);
