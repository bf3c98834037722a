// Handlers for the direction registry: open a file, list the kept directions, keep a candidate.
import type { AreaHandlers } from './context.ts';
import { requestPath } from '../request-paths.ts';
import { renderProbePairs } from '../probe-images.ts';

export const directionHandlers: AreaHandlers<'directions.open' | 'directions.list' | 'directions.keep' | 'directions.rename' | 'directions.delete' | 'directions.discard' | 'lab.probeImages'> = {
  'directions.rename': (p, { workspace }) => workspace.info(workspace.rename(p.id, p.name)),
  'directions.delete': (p, { workspace }) => {
    workspace.remove(p.id);
    return { directions: workspace.kept().map((d) => workspace.info(d)) };
  },
  'directions.discard': (p, { workspace }) => ({ discarded: workspace.discard(p.ids) }),
  'lab.probeImages': async (p, { workspace }) => ({ images: await renderProbePairs(workspace.requireGenerator(), workspace.direction(p.direction), p.seeds, p.strength, p.psi) }),
  'directions.open': (p, { workspace }) => workspace.openDirections(requestPath(p.path, 'the directions file')),
  'directions.list': (_p, { workspace }) => ({ directions: workspace.kept().map((d) => workspace.info(d)) }),
  'directions.keep': (p, { workspace }) => workspace.info(workspace.keep(p.id, p.name)),
};
