// Handlers for the project folder: open or create it, save the interface state, and sign off a
// direction in the append-only review log.
import { PlumblineError } from '../../core/errors.ts';
import { mergedAuditHistory, releaseLock, vectorHash } from '../project.ts';
import type { AreaHandlers } from './context.ts';
import { holderForWire } from '../../protocol/messages.ts';
import { requestPath } from '../request-paths.ts';

export const projectHandlers: AreaHandlers<'project.open' | 'project.saveUi' | 'project.review' | 'project.lock' | 'audit.history'> = {
  'project.lock': (p, { workspace }) => {
    const project = workspace.requireProject('a project lock');
    if (p.release) {
      releaseLock(project.dir, p.session);
      return { readOnly: true, lockHolder: null };
    }
    const r = project.lock(p.session);
    return { readOnly: r.readOnly, lockHolder: holderForWire(r.holder) };
  },
  // Every stored audit merged: the newest result of each kept direction.
  'audit.history': (_p, { workspace }) => (workspace.project ? mergedAuditHistory(workspace.project, workspace.kept().map((d) => d.name)) : { report: null, thumbnails: [], files: [] }) as never,
  'project.open': (p, { workspace }) => workspace.openProject({ ...p, path: requestPath(p.path, 'the project folder') }),
  'project.saveUi': (p, { workspace }) => ({ savedAt: workspace.requireProject('saving the interface state').saveUi(p) }),
  'project.review': (p, { workspace }) => {
    const project = workspace.requireProject('sign-off (its review log keeps the history)');
    const d = workspace.direction(p.direction);
    if (!d.kept) throw new PlumblineError('bad-request', `'${d.name}' is a candidate; keep it before signing it off`);
    // Through the sign-off rules (app/core/signoff-rules.ts): no-ops refused, unsupported approvals need an override reason.
    return { direction: d.id, signOff: project.review(d.name, vectorHash(d.vector, d.layers), p) };
  },
};
