// Direction sets: float32 .npy vectors with a JSON sidecar of metadata (format
// "plumbline.directions" v1, see docs/directions.md). Shapes: [D] one direction, [K, D] K
// directions, or [L, D] one W+ direction when the sidecar lists a single entry with perLayer.
import type { LatentLayout } from './latent.ts';
import { z } from 'zod';
import { PlumblineError } from './errors.ts';
import { decodeNpy } from './npy.ts';
import { parseJsonFile } from './json-file.ts';
import { directionNameKey, directionNameSchema, toDirectionName } from '../protocol/names.ts';

export const DIRECTIONS_FORMAT = 'plumbline.directions';

const entrySchema = z.object({
  name: directionNameSchema,
  target: z.string().min(1).nullable().default(null),
  layers: z.tuple([z.number().int().min(0), z.number().int().min(1)]).nullable().default(null),
  perLayer: z.boolean().default(false),
  notes: z.string().max(4000).default(''),
  source: z.record(z.string(), z.unknown()).default({ method: 'imported' }),
  truth: z.record(z.string(), z.unknown()).optional(),
});

export const directionsMetaSchema = z.object({
  format: z.literal(DIRECTIONS_FORMAT),
  version: z.literal(1),
  file: z.string().min(1).optional(),
  latentSize: z.number().int().positive().optional(),
  space: z.enum(['z', 'w', 'w+']).optional(),
  directions: z.array(entrySchema).min(1).max(4096),
});
export type DirectionsMeta = z.infer<typeof directionsMetaSchema>;

export interface Direction {
  name: string;
  target: string | null;
  layers: [number, number] | null;
  /** Unit vector: size values, or layers·size for a per-layer (W+) direction. */
  vector: Float32Array;
  notes: string;
  method: string;
  source: Record<string, unknown>;
  truth?: Record<string, unknown>;
}

export type { LatentLayout } from './latent.ts';

export function parseDirectionsMeta(text: string, file: string): DirectionsMeta {
  return parseJsonFile(directionsMetaSchema, text, file, 'invalid directions metadata', 'directions-invalid');
}

/** Builds directions from .npy bytes and optional metadata, checked against the generator's latent layout. */
export function readDirections(npyBytes: Uint8Array, npyFile: string, meta: DirectionsMeta | null, layout: Pick<LatentLayout, 'size' | 'layers'>, baseName: string): Direction[] {
  const arr = decodeNpy(npyBytes, npyFile);
  const { size, layers } = layout;
  for (const v of arr.data) if (!Number.isFinite(v)) throw new PlumblineError('npy-invalid', `${npyFile}: contains NaN or infinite values`, { file: npyFile });
  const entries = meta?.directions;
  let vectors: Float32Array[];
  let perLayer = false;
  if (arr.shape.length === 1) {
    if (arr.shape[0] !== size) throw mismatch(npyFile, `[${arr.shape[0]}]`, size, layers);
    vectors = [arr.data];
  } else if (arr.shape.length === 2) {
    if (arr.shape[1] !== size) throw mismatch(npyFile, `[${arr.shape.join(', ')}]`, size, layers);
    perLayer = entries?.length === 1 && entries[0].perLayer === true;
    if (perLayer) {
      if (arr.shape[0] !== layers) throw new PlumblineError('latent-size-mismatch', `${npyFile}: a per-layer (W+) direction needs shape [${layers}, ${size}] for this generator, got [${arr.shape.join(', ')}]`, { file: npyFile });
      vectors = [arr.data];
    } else {
      vectors = Array.from({ length: arr.shape[0] }, (_, k) => arr.data.slice(k * size, (k + 1) * size));
    }
  } else {
    throw new PlumblineError('npy-shape', `${npyFile}: expected shape [D], [K, D] or [L, D], got [${arr.shape.join(', ')}]`, { file: npyFile });
  }
  if (entries && entries.length !== vectors.length) {
    throw new PlumblineError('directions-invalid', `${npyFile}: the metadata lists ${entries.length} directions but the array holds ${vectors.length}`, { file: npyFile });
  }
  const seen = new Set<string>();
  return vectors.map((raw, k) => {
    const e = entries?.[k];
    let n = 0;
    for (const x of raw) n += x * x;
    if (!(n > 0)) throw new PlumblineError('npy-invalid', `${npyFile}: direction ${k} is all zeros`, { file: npyFile });
    const norm = Math.sqrt(n);
    // Without a sidecar the name comes from the file name, made safe to use as one itself.
    const name = e?.name ?? toDirectionName(vectors.length === 1 ? baseName : `${baseName}_${k}`);
    // Names become file names: 'Crest' and 'crest' are one file on macOS and Windows.
    if (seen.has(directionNameKey(name))) throw new PlumblineError('directions-invalid', `${npyFile}: two directions are named '${name}' (names are compared ignoring case)`, { file: npyFile });
    seen.add(directionNameKey(name));
    const lr = e?.layers ?? null;
    if (lr && (lr[0] >= lr[1] || lr[1] > layers)) {
      throw new PlumblineError('directions-invalid', `${npyFile}: direction '${name}' has layer range [${lr[0]}, ${lr[1]}) but this generator has ${layers} layer(s)`, { file: npyFile });
    }
    return {
      name,
      target: e?.target ?? null,
      layers: lr,
      vector: raw.map((x) => x / norm),
      notes: e?.notes ?? '',
      method: String(e?.source?.method ?? 'imported'),
      source: e?.source ?? { method: 'imported', file: npyFile },
      truth: e?.truth,
    };
  });
}

function mismatch(file: string, shape: string, size: number, layers: number): PlumblineError {
  return new PlumblineError(
    'latent-size-mismatch',
    `${file}: direction shape ${shape} does not match this generator's latent size ${size}${layers > 1 ? ` (W+ with ${layers} layers)` : ''}`,
    { file },
  );
}
