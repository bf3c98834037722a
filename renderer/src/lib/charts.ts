// Data mapping from audit reports to chart rows. Pure functions, unit-tested; the components
// hand these rows to the charting library.
import type { AuditWire } from '../../../app/protocol/messages.ts';

export interface HeatCell {
  direction: string;
  attribute: string;
  /** Attribute dependency in σ of the attribute (mean |Δ| at the worse reference sign). */
  value: number;
  low: number;
  high: number;
  isTarget: boolean;
  /** Dependency relative to the target's: what the leakage threshold is applied to. */
  relative: number;
  label: string;
}

const n = (v: number | null | undefined) => (typeof v === 'number' && Number.isFinite(v) ? v : 0);

export function heatmapCells(report: AuditWire): HeatCell[] {
  return report.directions.flatMap((d) => {
    const t = n(d.dependency[d.target]?.value);
    return report.attributes.map((a) => {
      const dep = d.dependency[a.name];
      const value = n(dep?.value);
      const relative = t > 0 ? value / t : 0;
      return {
        direction: d.name,
        attribute: a.name,
        value,
        low: n(dep?.low),
        high: n(dep?.high),
        isTarget: a.name === d.target,
        relative,
        label: `${d.name} → ${a.name}: ${value.toFixed(2)} σ (95% CI ${n(dep?.low).toFixed(2)}–${n(dep?.high).toFixed(2)})${a.name === d.target ? ' · target' : ` · ${relative.toFixed(2)} of the target`}`,
      };
    });
  });
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

export const VERDICT_LABEL: Record<string, string> = { pass: 'Pass', review: 'Needs review', fail: 'Fail', 'no-measure': 'No measure' };
