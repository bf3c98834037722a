// Reading a direction set the user opened (an .npy, or its .json sidecar) through the path policy:
// regular files only (a FIFO or a folder is refused at once), size and JSON caps, and a sidecar's
// `file` kept inside the sidecar's folder. Everything is parsed and checked before anything is
// returned, so a bad set is refused whole and nothing is half-loaded.
import { existsSync } from 'node:fs';
import { basename, dirname, resolve } from 'node:path';
import { parseDirectionsMeta, readDirections, type Direction, type DirectionsMeta, type LatentLayout } from '../core/directions.ts';
import { READ_LIMITS, readRegularFile, readTextFile, regularFile, resolveInside } from '../core/path-policy.ts';

export function readDirectionSet(path: string, layout: LatentLayout): { file: string; directions: Direction[] } {
  const given = resolve(path);
  // The path the user gave must itself be a regular file (this is what refuses a FIFO or a folder).
  regularFile(given, given.toLowerCase().endsWith('.json') ? 'directions metadata' : 'directions array');
  const isMeta = given.toLowerCase().endsWith('.json');
  const metaFile = isMeta ? given : given.replace(/\.npy$/i, '.json');
  let meta: DirectionsMeta | null = null;
  if (isMeta || (metaFile !== given && existsSync(metaFile))) meta = parseDirectionsMeta(readTextFile(metaFile, 'directions metadata'), metaFile);
  const dataFile = !isMeta ? given : meta?.file ? resolveInside(dirname(metaFile), meta.file, 'file', metaFile) : given.replace(/\.json$/i, '.npy');
  const bytes = readRegularFile(dataFile, 'directions array', READ_LIMITS.npyBytes);
  return { file: dataFile, directions: readDirections(bytes, dataFile, meta, layout, basename(dataFile, '.npy')) };
}
