// Handlers for "Start from an image…": the locate job (progress plus locate.preview events with the
// best match so far), and pinning its result as a named reference in the open project.
import type { LastLocate } from '../locate-job.ts';
import { locateJob, pinReference, referenceInfos } from '../locate-job.ts';
import type { Workspace } from '../workspace.ts';
import { driveSteps, type AreaHandlers } from './context.ts';

/** The last finished locate result per workspace, until it is pinned or replaced. */
const lastLocate = new WeakMap<Workspace, LastLocate>();

export const locateHandlers: AreaHandlers<'locate.run' | 'reference.pin' | 'reference.list'> = {
  'locate.run': async (p, ctx) => {
    const { workspace } = ctx;
    const steps = locateJob(workspace.requireGenerator(), p, {
      preview: (d) => ctx.event?.('locate.preview', { requestId: ctx.requestId ?? -1, ...d }),
      finished: (last) => lastLocate.set(workspace, last),
    });
    return driveSteps(steps, ctx);
  },
  'reference.pin': (p, { workspace }) => {
    workspace.project?.requireWritable();
    return pinReference(workspace.project?.dir ?? null, p.name, lastLocate.get(workspace) ?? null);
  },
  'reference.list': (_p, { workspace }) => ({ references: referenceInfos(workspace.project?.dir ?? null) }),
};
