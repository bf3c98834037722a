// Handlers for the project folder: open or create it, save the interface state, and sign off a
// direction in the append-only review log.
import { PlumblineError } from '../../core/errors.ts';
import { vectorHash } from '../project.ts';
import type { AreaHandlers } from './context.ts';

export const projectHandlers: AreaHandlers<'project.open' | 'project.saveUi' | 'project.review'> = {
  'project.open': (p, { workspace }) => workspace.openProject(p),
  'project.saveUi': (p, { workspace }) => ({ savedAt: workspace.requireProject('saving the interface state').saveUi(p) }),
  'project.review': (p, { workspace }) => {
    const project = workspace.requireProject('sign-off (its review log keeps the history)');
    const d = workspace.direction(p.direction);
    if (!d.kept) throw new PlumblineError('bad-request', `'${d.name}' is a candidate; keep it before signing it off`);
    const hash = vectorHash(d.vector, d.layers);
    project.appendReview({ at: new Date().toISOString(), direction: d.name, vectorHash: hash, status: p.status, reviewer: p.reviewer, note: p.note });
    return { direction: d.id, signOff: project.signOff(d.name, hash) };
  },
};
