// Writes direction sets as .npy plus the JSON sidecar (docs/directions.md), atomically.
import { basename } from 'node:path';
import { writeFileAtomic } from './atomic-write.ts';
import { encodeNpy } from './npy.ts';
import { DIRECTIONS_FORMAT } from './directions.ts';

export interface DirectionToWrite {
  name: string;
  target: string | null;
  layers: [number, number] | null;
  vector: Float32Array;
  notes: string;
  source: Record<string, unknown> | object;
}

export function writeDirections(npyFile: string, directions: DirectionToWrite[], space: 'z' | 'w' | 'w+'): { npy: string; json: string } {
  if (directions.length === 0) throw new RangeError('no directions to write');
  const size = directions[0].vector.length;
  for (const d of directions) if (d.vector.length !== size) throw new RangeError(`direction ${d.name} has ${d.vector.length} values, expected ${size}`);
  const data = new Float32Array(directions.length * size);
  directions.forEach((d, k) => data.set(d.vector, k * size));
  const npy = npyFile.endsWith('.npy') ? npyFile : `${npyFile}.npy`;
  const json = npy.replace(/\.npy$/, '.json');
  const meta = {
    format: DIRECTIONS_FORMAT,
    version: 1,
    file: basename(npy),
    latentSize: size,
    space: space === 'w+' ? 'w' : space,
    directions: directions.map((d) => ({ name: d.name, target: d.target, layers: d.layers, notes: d.notes, source: d.source })),
  };
  writeFileAtomic(npy, encodeNpy(data, [directions.length, size]));
  writeFileAtomic(json, JSON.stringify(meta, null, 2) + '\n');
  return { npy, json };
}
