// Data mapping from audit reports to chart rows. Pure functions, unit-tested; the components
// hand these rows to the charting library.
import type { AuditWire } from '../../../app/protocol/messages.ts';

/**
 * How a heatmap cell is drawn: 'target' (the direction's own target, outlined), 'counted' (an
 * attribute that can leak, coloured by its change), 'set-aside' (an apparent leak within the
 * instrument's own noise floor or cross-talk: not counted, grey and hatched) or 'unjudged' (a
 * composite or descriptor reported but never taken as a leak, e.g. colourfulness: plain grey).
 */
export type HeatKind = 'target' | 'counted' | 'set-aside' | 'unjudged';

export interface HeatCell {
  direction: string;
  attribute: string;
  /** Attribute dependency in σ of the attribute (mean |Δ| at the worse reference sign). */
  value: number;
  low: number;
  high: number;
  isTarget: boolean;
  kind: HeatKind;
  /** Dependency relative to the target's: a readout beside the value. */
  relative: number;
  /** The tooltip: the value with its interval, and why a grey cell is grey. */
  label: string;
}

const n = (v: number | null | undefined) => (typeof v === 'number' && Number.isFinite(v) ? v : 0);
const f2 = (v: number | null | undefined) => (typeof v === 'number' && Number.isFinite(v) ? v.toFixed(2) : '—');

export function heatmapCells(report: AuditWire): HeatCell[] {
  return report.directions.flatMap((d) => {
    const t = n(d.dependency[d.target]?.value);
    return report.attributes.map((a) => {
      const dep = d.dependency[a.name];
      const value = n(dep?.value);
      const relative = t > 0 ? value / t : 0;
      const isTarget = a.name === d.target;
      const within = d.withinInstrument?.find((w) => w.attribute === a.name);
      const blind = d.blind?.find((b) => b.attribute === a.name);
      // A direction whose target has no measure is not judged at all: its changes are shown, not counted as leaks.
      const noMeasure = d.verdict === 'no-measure';
      const kind: HeatKind = isTarget ? 'target' : a.judged === false || noMeasure ? 'unjudged' : within ? 'set-aside' : 'counted';
      const why =
        kind === 'target' ? ' · target'
        : noMeasure ? ` · not judged: this direction's target ${d.target} has no measure in this audit, so none of its changes is judged as a leak`
        : kind === 'unjudged' ? ' · reported, not judged: a composite or descriptor, never taken as a leak'
        : kind === 'set-aside' ? ` · set aside, not counted as a leak: within the instrument's own noise floor (${f2(within!.noiseFloor)} σ) or cross-talk (${f2(within!.crossTalk)} σ per σ)${within!.via ? `, explained by the leak into ${within!.via}` : ''}`
        : ` · ${relative.toFixed(2)} of the target`;
      const blindText = blind && kind !== 'unjudged' ? ` · cannot detect a leak below ${f2(blind.limit)} σ here` : '';
      return {
        direction: d.name,
        attribute: a.name,
        value,
        low: n(dep?.low),
        high: n(dep?.high),
        isTarget,
        kind,
        relative,
        label: `${d.name} → ${a.name}: ${value.toFixed(2)} σ (95% CI ${n(dep?.low).toFixed(2)}–${n(dep?.high).toFixed(2)})${why}${blindText}`,
      };
    });
  });
}

/**
 * A worst probe's caption: the attribute its leak counts in — beyond the instrument, judged, not
 * set aside for the direction — with that leak in σ of the attribute, or that nothing counts.
 * (Reports made before worst probes were chosen this way could name a set-aside or unjudged
 * attribute; those read as nothing beyond the instrument too.)
 */
export function worstProbeCaption(report: AuditWire, direction: string, probe: { attribute: string; leakage: number }): { attribute: string | null; text: string } {
  const d = report.directions.find((x) => x.name === direction);
  const judged = report.attributes.find((a) => a.name === probe.attribute)?.judged !== false;
  const setAside = d?.withinInstrument?.some((w) => w.attribute === probe.attribute) ?? false;
  const counts = probe.attribute !== 'none' && probe.leakage > 0 && judged && !setAside;
  // A leak that would print as 0.00 σ is said as under 0.01 σ, without an attribute to point at.
  if (counts && probe.leakage < 0.005) return { attribute: null, text: `under 0.01 σ ${report.calibration ? 'beyond the instrument' : 'of leak'}` };
  if (counts) return { attribute: probe.attribute, text: `${probe.attribute} ${probe.leakage.toFixed(2)} σ` };
  return { attribute: null, text: report.calibration ? 'nothing beyond the instrument' : 'no leak' };
}

/**
 * The change map's level, 0–1 of its full scale (ΔE00 ÷ fullScale, clipped), read back from one
 * pixel of its PNG: the inverse of changeMapImage in app/core/audit/change-map.ts (black → red →
 * yellow → white: red rises over the first half, green from 0.3, blue from 0.7), so an overlay
 * drawn from it is linear in ΔE00 up to full scale, as its colour scale says.
 */
export function changeMapLevel(r: number, g: number, b: number): number {
  if (r < 255) return r / 510;
  if (b > 0) return 0.7 + (0.3 * b) / 255;
  return Math.min(1, (1.4 * (g / 255) ** 1.25 + 0.6) / 2);
}

export interface CurveRow {
  attribute: string;
  strength: number;
  mean: number;
  low: number;
  high: number;
}

/** Response curves of one direction: one row per attribute and strength, with its band. */
export function curveRows(report: AuditWire, direction: string, attributes?: string[]): CurveRow[] {
  const d = report.directions.find((x) => x.name === direction);
  if (!d) return [];
  const names = attributes ?? Object.keys(d.curves.attributes);
  return names.flatMap((attribute) => {
    const c = d.curves.attributes[attribute];
    if (!c) return [];
    return d.curves.strengths.map((strength, i) => ({ attribute, strength: strengthValue(strength), mean: c.mean[i], low: c.low[i], high: c.high[i] }));
  });
}

/** The attributes worth drawing for a direction: its target and the k it leaks into most (judged, beyond the instrument). */
export function leadingAttributes(report: AuditWire, direction: string, k = 3): string[] {
  const d = report.directions.find((x) => x.name === direction);
  if (!d) return [];
  // Leaks only: attributes that are judged, not set aside as within the instrument for this
  // direction, and moved at all (a flat line at zero is not a leak worth a colour).
  const unjudged = new Set(report.attributes.filter((a) => a.judged === false).map((a) => a.name));
  const setAside = new Set((d.withinInstrument ?? []).map((w) => w.attribute));
  const others = Object.entries(d.dependency)
    .filter(([a, v]) => a !== d.target && !unjudged.has(a) && !setAside.has(a) && n(v.value) > 0)
    .sort((a, b) => n(b[1].value) - n(a[1].value))
    .slice(0, k)
    .map(([a]) => a);
  return [d.target, ...others];
}

export function pathRows(report: AuditWire, direction: string): CurveRow[] {
  const d = report.directions.find((x) => x.name === direction);
  if (!d) return [];
  const c = d.pathLengthCurve;
  return c.strengths.map((strength, i) => ({ attribute: 'path length', strength: strengthValue(strength), mean: c.mean[i], low: c.low[i], high: c.high[i] }));
}

/**
 * The upper end of a colour scale that covers every value: the smallest multiple of a "nice" step
 * (1, 2 or 5 × 10^k, aiming at about `count` steps) at or above the largest value. Same rule as
 * d3-array's tickIncrement / d3-scale's nice(), written from its definition.
 */
export function niceMax(max: number, count = 10): number {
  if (!(max > 0) || !Number.isFinite(max)) return 1;
  const raw = max / count;
  const power = Math.floor(Math.log10(raw));
  const error = raw / 10 ** power;
  const factor = error >= Math.sqrt(50) ? 10 : error >= Math.sqrt(10) ? 5 : error >= Math.sqrt(2) ? 2 : 1;
  const step = factor * 10 ** power;
  return Number((Math.ceil(max / step - 1e-9) * step).toPrecision(12));
}

/** Colour domain of the heatmap: from 0 to a nice value at or above the largest coloured (counted) cell; grey cells do not stretch it. */
export function heatDomain(cells: HeatCell[]): [number, number] {
  return [0, niceMax(Math.max(0, ...cells.filter((c) => c.kind === 'counted').map((c) => c.value)))];
}

/**
 * Attribute colours: the Okabe–Ito qualitative palette (Okabe & Ito 2008, "Color Universal
 * Design", also Wong 2011, Nature Methods 8:441), told apart by viewers with the common colour
 * vision deficiencies. Its black is left out (invisible on the dark slate background); the other
 * seven all reach 3:1 contrast against it.
 */
export const ATTRIBUTE_PALETTE = ['#e69f00', '#56b4e9', '#009e73', '#f0e442', '#0072b2', '#d55e00', '#cc79a7'];

/**
 * One colour per attribute for the charts and captions of one direction's view. A report can
 * name more attributes than any palette has clearly distinct colours, so colours go first to the
 * attributes that are drawn together: the focused direction's target, then the attributes it
 * moves most (the ones its curves and worst probes show), then the rest in the report's order.
 * Deterministic: the same report and focus always give the same colours, and the first
 * ATTRIBUTE_PALETTE.length of the view never share one.
 */
export function attributeColors(report: AuditWire, focus: string | null = null): Record<string, string> {
  const all = report.attributes.map((a) => a.name);
  const first = focus ? leadingAttributes(report, focus, all.length).filter((a) => all.includes(a)) : [];
  const order = [...first, ...all.filter((a) => !first.includes(a))];
  return Object.fromEntries(order.map((a, i) => [a, ATTRIBUTE_PALETTE[i % ATTRIBUTE_PALETTE.length]]));
}

/** Tick labels that read as numbers with their unit, on linear and log axes alike (no "1e-3" runs). */
export function tickLabel(v: number): string {
  if (v === 0) return '0';
  const a = Math.abs(v);
  if (a >= 1000 || a < 0.001) return v.toExponential(0).replace('e+', 'e');
  return String(Number(v.toPrecision(2)));
}

const STEPS = [1, 2, 5];
const round12 = (v: number) => Number(v.toPrecision(12));
/** The largest 1, 2 or 5 × 10^k at or below v (v > 0). */
function niceBelow(v: number): number {
  const k = Math.floor(Math.log10(v));
  for (const m of [...STEPS].reverse()) if (round12(m * 10 ** k) <= v * (1 + 1e-12)) return round12(m * 10 ** k);
  return round12(10 ** k);
}
/** The smallest 1, 2 or 5 × 10^k at or above v (v > 0). */
function niceAbove(v: number): number {
  const k = Math.floor(Math.log10(v));
  for (const m of [...STEPS, 10]) if (round12(m * 10 ** k) >= v * (1 - 1e-12)) return round12(m * 10 ** k);
  return round12(10 ** (k + 1));
}

/**
 * A log axis that covers lo…hi with every tick a nice value: the domain runs from the 1-2-5
 * value at or below lo to the one at or above hi, and the ticks are the 1, 2 and 5 × 10^k inside
 * it (both ends included, so never an odd end such as 0.0091); more than `max` thin to powers of
 * ten, with the domain widened to powers of ten so its ends stay labelled.
 */
export function logAxis(lo: number, hi: number, max = 7): { domain: [number, number]; ticks: number[] } {
  if (!(lo > 0) || !(hi >= lo) || !Number.isFinite(hi)) return { domain: [1, 10], ticks: [1, 2, 5, 10] };
  const a = niceBelow(lo);
  const b = Math.max(niceAbove(hi), niceAbove(a * 1.000001));
  const ticks: number[] = [];
  for (let k = Math.floor(Math.log10(a)); k <= Math.ceil(Math.log10(b)); k++)
    for (const m of STEPS) {
      const v = round12(m * 10 ** k);
      if (v >= a && v <= b) ticks.push(v);
    }
  if (ticks.length <= max) return { domain: [a, b], ticks };
  const [p, q] = [Math.floor(Math.log10(a)), Math.ceil(Math.log10(b))];
  const powers = Array.from({ length: q - p + 1 }, (_, i) => round12(10 ** (p + i)));
  return { domain: [powers[0], powers.at(-1)!], ticks: powers };
}

/** A value in a chart's tooltip: three significant digits, and never "-0" (a negated zero or a rounding of a tiny negative). */
export function tipNumber(v: number): string {
  if (!Number.isFinite(v)) return String(v);
  const r = Number(v.toPrecision(3));
  return r === 0 ? '0' : String(r);
}

/** A strength as a chart shows it: −0 (from a negated grid) reads as 0 in ticks and tooltips. */
export const strengthValue = (v: number) => (Object.is(v, -0) ? 0 : v);

export const VERDICT_LABEL: Record<string, string> = { pass: 'Pass', review: 'Needs review', fail: 'Fail', 'no-measure': 'No measure' };
