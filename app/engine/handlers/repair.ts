// Handler for repairing a direction: projected off the boundaries of chosen attributes (holding
// others), kept under a fresh name and saved into the open project.
import type { Workspace, LoadedDirection } from '../workspace.ts';
import { repairDirection } from '../lab.ts';
import type { AreaHandlers } from './context.ts';
import type { Params } from '../../protocol/messages.ts';

/** The repair both the app and the CLI run: the repaired direction joins the registry as kept. */
export async function repairInWorkspace(workspace: Workspace, p: Params<'lab.repair'> & { samples?: number; seed?: number; layers?: [number, number] | null }, checkpoint?: () => Promise<void>) {
  const gen = workspace.requireGenerator();
  const parent = workspace.direction(p.direction);
  const r = await repairDirection(gen, parent, p.against, { hold: p.hold, samples: p.samples, seed: p.seed, layers: p.layers, checkpoint });
  const entry: LoadedDirection = workspace.register({ name: workspace.uniqueName(r.name), target: r.target, layers: r.layers, vector: r.vector, notes: r.notes, method: 'repair', source: r.source as unknown as Record<string, unknown> }, true);
  workspace.save(entry);
  return { parent, entry, boundaries: r.boundaries };
}

export const repairHandlers: AreaHandlers<'lab.repair'> = {
  'lab.repair': async (p, { workspace, progress, checkpoint }) => {
    progress({ done: 0, total: 1, label: `fitting boundaries for ${p.against.join(', ')}` });
    const { entry, boundaries } = await repairInWorkspace(workspace, p, checkpoint);
    return { direction: workspace.info(entry), boundaries };
  },
};
