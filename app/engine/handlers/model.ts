// Handlers for opening a generator. Jobs rendering with the previous generator are cancelled.
import { demoCardPath } from '../workspace.ts';
import type { AreaHandlers } from './context.ts';

export const modelHandlers: AreaHandlers<'model.openDemo' | 'model.open'> = {
  'model.openDemo': async (_p, { workspace, jobs }) => {
    const info = await workspace.openModel(demoCardPath());
    jobs.cancelAll();
    return info;
  },
  'model.open': async (p, { workspace, jobs }) => {
    const info = await workspace.openModel(p.path, p.mappingPath);
    jobs.cancelAll();
    return info;
  },
};
