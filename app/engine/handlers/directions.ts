// Handlers for the direction registry: open a file, list the kept directions, keep a candidate.
import type { AreaHandlers } from './context.ts';

export const directionHandlers: AreaHandlers<'directions.open' | 'directions.list' | 'directions.keep'> = {
  'directions.open': (p, { workspace }) => workspace.openDirections(p.path),
  'directions.list': (_p, { workspace }) => ({ directions: workspace.kept().map((d) => workspace.info(d)) }),
  'directions.keep': (p, { workspace }) => workspace.info(workspace.keep(p.id, p.name)),
};
