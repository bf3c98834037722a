// Attribute sources for audits and boundaries: the generator's own named attribute outputs
// (declared by its model card), the built-in image measures, user ONNX scorer cards and attributes
// the lead defined from tagged seeds. Scores come back as one row of K values per image.
import { PlumblineError } from '../core/errors.ts';
import { IMAGE_MEASURES, measureImage } from '../core/scorers/measures.ts';
export { IMAGE_MEASURES };
import type { Generator, RenderOutput } from './generator.ts';
import type { ScorerModel } from './scorer-model.ts';
import { builtInMeasureSource, type DefinedAttribute } from './defined-attributes.ts';
import type { RgbaImage } from '../core/image.ts';

export interface AttributeSpec {
  name: string;
  unit: string;
  source: 'card' | 'image' | 'scorer' | 'defined';
  /** Column in the card's attribute output, index in IMAGE_MEASURES, or attribute of the scorer card. */
  index: number;
  scorer?: ScorerModel;
  /** A defined attribute; its cross-validated accuracy goes wherever it is used. */
  defined?: DefinedAttribute;
  period?: number;
  /** Circular with a per-image period 360°/k, k being attribute `periodFrom` (an index into the specs) of the unedited image. */
  periodFrom?: number;
  /** false: reported, but not a leak candidate (a composite or descriptor measure the user did not pick by name). */
  leak: boolean;
}

export type AttributeSelection = 'default' | 'card' | 'image' | 'all' | string[];

/** default: the card's attributes when it declares some, else the image measures; plus any user scorers and defined attributes. */
export function resolveAttributes(gen: Generator, selection: AttributeSelection = 'default', scorers: ScorerModel[] = [], defined: DefinedAttribute[] = []): AttributeSpec[] {
  const specs = linkPeriods(selectAttributes(gen, selection, scorers, defined));
  // A defined attribute may share a name with a source left out of this selection (e.g. the
  // card's 'gem' when auditing from images alone), never with one in it.
  const seen = new Set<string>();
  for (const a of specs) {
    if (seen.has(a.name)) throw new PlumblineError('bad-request', `two attributes in this audit are named '${a.name}' (${specs.filter((x) => x.name === a.name).map((x) => x.source).join(' and ')}); rename the defined one`);
    seen.add(a.name);
  }
  return specs;
}

function selectAttributes(gen: Generator, selection: AttributeSelection, scorers: ScorerModel[], defined: DefinedAttribute[]): AttributeSpec[] {
  const card: AttributeSpec[] = (gen.card?.attributes ?? []).map((a, index) => ({ name: a.name, unit: a.unit ?? '', source: 'card', index, leak: true }));
  const image: AttributeSpec[] = IMAGE_MEASURES.map((m, index) => ({ name: m.name, unit: m.unit, source: 'image', index, period: m.period, leak: m.verdicts }));
  // Scorers and defined attributes were asked for by the user: always leak candidates.
  const user: AttributeSpec[] = [
    ...scorers.flatMap((sc) => sc.card.attributes.map((a, index) => ({ name: a.name, unit: a.unit, source: 'scorer' as const, index, scorer: sc, leak: true }))),
    ...defined.map((d, index) => ({ name: d.name, unit: d.doc.unit, source: 'defined' as const, index, defined: d, leak: true })),
  ];
  if (selection === 'default') return [...(card.length ? card : image), ...user];
  if (selection === 'card') {
    if (!card.length) throw new PlumblineError('bad-request', `${gen.info.name} declares no attribute outputs in its model card; use the image measures (${image.map((m) => m.name).join(', ')})`);
    return card;
  }
  if (selection === 'image') return [...image, ...user];
  if (selection === 'all') return [...card, ...image, ...user];
  const all = [...card, ...image, ...user];
  return selection.map((name) => {
    const found = all.find((a) => a.name === name);
    if (!found) throw new PlumblineError('bad-request', `unknown attribute '${name}'; available: ${all.map((a) => a.name).join(', ')}`);
    // Picked by name: a leak candidate even if it is a composite.
    return { ...found, leak: true };
  });
}

/** Orientation's period comes from the harmonic order measured on the same image: keep that measure alongside (reported, not judged). */
function linkPeriods(specs: AttributeSpec[]): AttributeSpec[] {
  const out = [...specs];
  for (const s of specs) {
    const from = s.source === 'image' ? IMAGE_MEASURES[s.index].periodFrom : undefined;
    if (!from) continue;
    let k = out.findIndex((x) => x.source === 'image' && x.name === from);
    if (k < 0) {
      const index = IMAGE_MEASURES.findIndex((m) => m.name === from);
      out.push({ name: from, unit: IMAGE_MEASURES[index].unit, source: 'image', index, leak: false });
      k = out.length - 1;
    }
    s.periodFrom = k;
  }
  return out;
}

/**
 * Change of attribute j from an unedited score row to an edited one, wrapped for circular
 * attributes. NaN when either side is not measurable, or when a per-image period (orientation's
 * 360°/k) differs between the two images, so the angles are not comparable.
 */
export function attributeChange(specs: AttributeSpec[], j: number, base: ArrayLike<number>, edit: ArrayLike<number>): number {
  const s = specs[j];
  if (s.periodFrom !== undefined) {
    const kb = base[s.periodFrom];
    if (!(kb > 0) || kb !== edit[s.periodFrom]) return NaN;
    return attributeDelta(base[j], edit[j], 360 / kb);
  }
  return attributeDelta(base[j], edit[j], s.period);
}

/**
 * What the images themselves give: the built-in measures (when a spec needs them), each scorer
 * model's outputs, and each defined attribute's scores — defined attributes reuse the measures
 * just taken (their descriptor includes them).
 */
async function scoreFromImages(specs: AttributeSpec[], rgba: RgbaImage[]) {
  const measures = specs.some((s) => s.source === 'image' || s.source === 'defined') ? rgba.map((img) => measureImage(img)) : [];
  const byScorer = new Map<ScorerModel, Float64Array>();
  for (const s of specs) if (s.scorer && !byScorer.has(s.scorer)) byScorer.set(s.scorer, await s.scorer.score(rgba));
  const known = new WeakMap<RgbaImage, ArrayLike<number>>(rgba.map((img, i) => [img, measures[i]]));
  const byDefined = new Map<DefinedAttribute, Float64Array>();
  for (const s of specs) if (s.defined && !byDefined.has(s.defined)) byDefined.set(s.defined, s.defined.score(rgba, builtInMeasureSource(known)));
  return { measures, byScorer, byDefined };
}

/** Scores a rendered batch: [n × K] in spec order. Checks every value for NaN. */
export async function scoreBatch(gen: Generator, out: RenderOutput, specs: AttributeSpec[]): Promise<Float64Array> {
  const k = specs.length;
  const scores = new Float64Array(out.n * k);
  const needImages = specs.some((s) => s.source !== 'card');
  const rgba = needImages ? Array.from({ length: out.n }, (_, i) => gen.toRgba(out.images, i)) : [];
  const { measures, byScorer, byDefined } = await scoreFromImages(specs, rgba);
  const cardWidth = out.attributes ? out.attributes.length / out.n : 0;
  for (let i = 0; i < out.n; i++) {
    for (let j = 0; j < k; j++) {
      const s = specs[j];
      let v: number;
      if (s.source === 'card') {
        if (!out.attributes) throw new PlumblineError('bad-request', `${gen.info.name} produced no attribute output`);
        v = out.attributes[i * cardWidth + s.index];
      } else if (s.source === 'image') v = measures[i][s.index];
      else if (s.defined) v = byDefined.get(s.defined)![i];
      else {
        const all = byScorer.get(s.scorer!)!;
        v = all[i * s.scorer!.card.attributes.length + s.index];
      }
      // A built-in measure may be "not measurable here" (NaN) on some images; statistics leave those out.
      if (s.source === 'image' && Number.isNaN(v) && IMAGE_MEASURES[s.index].undefinedWhen) {
        scores[i * k + j] = v;
        continue;
      }
      if (!Number.isFinite(v)) throw new PlumblineError('output-not-finite', `attribute scorer '${s.name}' returned ${v} for an image; the audit cannot use it`);
      scores[i * k + j] = v;
    }
  }
  return scores;
}

/** Difference b − a, wrapped into (−period/2, period/2] for circular attributes. */
export function attributeDelta(a: number, b: number, period?: number): number {
  let d = b - a;
  if (period) {
    d = ((d % period) + period) % period;
    if (d > period / 2) d -= period;
  }
  return d;
}

/** Scores images outside a render (calibration): image measures, scorers and defined attributes; card attributes are NaN (no image can be re-run through the card). */
export async function scoreImages(specs: AttributeSpec[], rgba: RgbaImage[]): Promise<Float64Array> {
  const k = specs.length;
  const scores = new Float64Array(rgba.length * k).fill(NaN);
  // Defined attributes score from the image alone, so the instrument is calibrated for them too.
  const { measures, byScorer, byDefined } = await scoreFromImages(specs, rgba);
  for (let i = 0; i < rgba.length; i++)
    specs.forEach((s, j) => {
      if (s.source === 'image') scores[i * k + j] = measures[i][s.index];
      else if (s.defined) scores[i * k + j] = byDefined.get(s.defined)![i];
      else if (s.scorer) scores[i * k + j] = byScorer.get(s.scorer)![i * s.scorer.card.attributes.length + s.index];
    });
  return scores;
}
