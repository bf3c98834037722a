// Audit step 2a, calibrating the instrument: applies the exact operations of
// app/core/audit/calibration.ts to the images of the first probes and scores the results, giving
// each measure its noise floor and cross-talk on this probe set (issue 9 part 3). Runs once per
// audit, before the directions; card attributes cannot be re-scored from an image and are left
// uncalibrated.
import { EXACT, INVISIBLE, calibrate, type Frame, type MeasureCalibration } from '../../core/audit/calibration.ts';
import type { RgbaImage } from '../../core/image.ts';
import { analyseImage, imageMoments } from '../../core/scorers/measures.ts';
import { median } from '../../core/stats.ts';
import { attributeChange, scoreImages, type AttributeSpec } from '../attributes.ts';

export interface InstrumentCalibration {
  probes: number;
  operations: { invisible: string[]; exact: string[] };
  measures: Record<string, MeasureCalibration>;
}

export async function calibrateInstrument(images: RgbaImage[], baseScores: Float64Array, specs: AttributeSpec[], sigma: number[]): Promise<InstrumentCalibration | null> {
  const K = specs.length;
  const calibratable = specs.map((s) => s.source !== 'card');
  if (!images.length || !calibratable.some(Boolean)) return null;
  const frames: Frame[] = images.map((img) => {
    const a = analyseImage(img);
    const { width: w, height: h } = img;
    const mo = a.subject.found ? imageMoments(a.subject.mask, w, h) : { cx: (w - 1) / 2, cy: (h - 1) / 2 };
    const border: number[][] = [[], [], []];
    for (let x = 0; x < w; x++) for (const y of [0, h - 1]) for (let c = 0; c < 3; c++) border[c].push(img.data[(y * w + x) * 4 + c]);
    for (let y = 0; y < h; y++) for (const x of [0, w - 1]) for (let c = 0; c < 3; c++) border[c].push(img.data[(y * w + x) * 4 + c]);
    return { cx: mo.cx, cy: mo.cy, mask: a.subject.mask, fill: border.map((b) => Math.round(median(b))) as [number, number, number] };
  });
  const run = async (ops: typeof EXACT) => {
    const out: Float64Array[][] = [];
    for (const op of ops) {
      const changed = images.map((img, p) => op.apply(img, frames[p], p));
      const sc = await scoreImages(specs, changed);
      out.push(specs.map((_, j) => Float64Array.from(images, (_img, p) => (calibratable[j] ? Math.abs(attributeChange(specs, j, baseScores.subarray(p * K, (p + 1) * K), sc.subarray(p * K, (p + 1) * K))) / sigma[j] : NaN))));
    }
    return out;
  };
  const names = specs.map((s) => s.name);
  const measures = calibrate(names, await run(INVISIBLE), await run(EXACT));
  for (const [j, s] of specs.entries()) if (!calibratable[j]) delete measures[s.name];
  return { probes: images.length, operations: { invisible: INVISIBLE.map((o) => o.name), exact: EXACT.map((o) => o.name) }, measures };
}
