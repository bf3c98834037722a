// The safe range rule, on its own so a pack's claimed range can be recomputed from the audit
// curves it carries: the widest interval around 0, on the audit's strength grid, where leakage
// stays under the pass threshold and the path length does not spike (more than `spikeRatio`
// times the median over |t| ≤ 1). The audit runner applies the same rule (app/engine/audit.ts).

export interface SafeRangeEvidence {
  /** Audited strengths in σ, including 0. */
  strengths: number[];
  /** Leakage at each strength; null where undefined (at 0) or not finite. */
  leakageCurve: (number | null)[];
  leakPass: number;
  pathLength: { strengths: number[]; mean: number[] };
  spikeRatio: number;
}

export function safeRangeFromCurves(e: SafeRangeEvidence): [number, number] {
  const { strengths: grid, leakageCurve } = e;
  const calm = e.pathLength.strengths.map((t, i) => (Math.abs(t) <= 1 ? e.pathLength.mean[i] : NaN)).filter(Number.isFinite);
  const calmMedian = calm.length ? [...calm].sort((a, b) => a - b)[Math.floor(calm.length / 2)] : NaN;
  const spikeAt = (s: number) => {
    const i = e.pathLength.strengths.indexOf(s);
    return i >= 0 && calmMedian > 0 && e.pathLength.mean[i] > e.spikeRatio * calmMedian;
  };
  const side = (sign: 1 | -1) => {
    let edge = 0;
    for (const s of grid.filter((x) => x * sign > 0).sort((a, b) => Math.abs(a) - Math.abs(b))) {
      const l = leakageCurve[grid.indexOf(s)];
      if (!(typeof l === 'number' && l < e.leakPass) || spikeAt(s)) break;
      edge = s;
    }
    return edge;
  };
  return [side(-1), side(1)];
}
