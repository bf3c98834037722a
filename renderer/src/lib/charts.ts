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
      const kind: HeatKind = isTarget ? 'target' : a.judged === false ? 'unjudged' : within ? 'set-aside' : 'counted';
      const why =
        kind === 'target' ? ' · target'
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
    return d.curves.strengths.map((strength, i) => ({ attribute, strength, mean: c.mean[i], low: c.low[i], high: c.high[i] }));
  });
}

/** The attributes worth drawing for a direction: its target and the k it leaks into most. */
export function leadingAttributes(report: AuditWire, direction: string, k = 3): string[] {
  const d = report.directions.find((x) => x.name === direction);
  if (!d) return [];
  const others = Object.entries(d.dependency).filter(([a]) => a !== d.target).sort((a, b) => n(b[1].value) - n(a[1].value)).slice(0, k).map(([a]) => a);
  return [d.target, ...others];
}

export function pathRows(report: AuditWire, direction: string): CurveRow[] {
  const d = report.directions.find((x) => x.name === direction);
  if (!d) return [];
  const c = d.pathLengthCurve;
  return c.strengths.map((strength, i) => ({ attribute: 'path length', strength, mean: c.mean[i], low: c.low[i], high: c.high[i] }));
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
 * One colour per attribute, the same in every chart and caption of a report: picked by the
 * attribute's place in the report's attribute list, so hiding some never recolours the others.
 * Our own twelve hues, spaced for the dark slate background; more attributes repeat them.
 */
export const ATTRIBUTE_PALETTE = ['#4fb3a1', '#e0a84a', '#8fa8ff', '#e26d5c', '#b58ad9', '#7cc36e', '#e88bb8', '#57b8e0', '#d4c45a', '#c98f5f', '#9aa7b4', '#5fd1c0'];

export function attributeColors(report: AuditWire): Record<string, string> {
  return Object.fromEntries(report.attributes.map((a, i) => [a.name, ATTRIBUTE_PALETTE[i % ATTRIBUTE_PALETTE.length]]));
}

/** Tick labels that read as numbers with their unit, on linear and log axes alike (no "1e-3" runs). */
export function tickLabel(v: number): string {
  if (v === 0) return '0';
  const a = Math.abs(v);
  if (a >= 1000 || a < 0.001) return v.toExponential(0).replace('e+', 'e');
  return String(Number(v.toPrecision(2)));
}

/**
 * Tick values for a log axis from lo to hi, every one to be labelled: 1, 2 and 5 × 10^k inside
 * the range, thinned to powers of ten when there would be more than `max`; the range's own ends
 * (rounded to two digits) when no such value falls inside.
 */
export function logTicks(lo: number, hi: number, max = 7): number[] {
  if (!(lo > 0) || !(hi >= lo)) return [];
  const out: number[] = [];
  for (let k = Math.floor(Math.log10(lo)); k <= Math.ceil(Math.log10(hi)); k++)
    for (const m of [1, 2, 5]) {
      const v = Number((m * 10 ** k).toPrecision(12));
      if (v >= lo && v <= hi) out.push(v);
    }
  const thinned = out.length > max ? out.filter((v) => Math.abs(Math.log10(v) - Math.round(Math.log10(v))) < 1e-9) : out;
  return thinned.length >= 2 ? thinned : [...new Set([Number(lo.toPrecision(2)), ...thinned, Number(hi.toPrecision(2))])].sort((a, b) => a - b);
}

export const VERDICT_LABEL: Record<string, string> = { pass: 'Pass', review: 'Needs review', fail: 'Fail', 'no-measure': 'No measure' };
