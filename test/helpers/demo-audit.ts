// The demo's directions as audit input, and running an audit job to its report: shared by the
// engine tests that audit the bundled demo in-process.
import { join } from 'node:path';
import type { Workspace } from '../../app/engine/workspace.ts';
import type { AuditDirection } from '../../app/core/audit/plan.ts';
import type { AuditReport } from '../../app/engine/audit/run.ts';

export const demoDir = join(import.meta.dirname, '..', '..', 'resources', 'demo');

/** Runs an audit job to the end and returns its report. */
export async function drain(job: AsyncGenerator<unknown, AuditReport, void>): Promise<AuditReport> {
  for (;;) {
    const s = await job.next();
    if (s.done) return s.value;
  }
}

/** The demo's directions (all, or those named) opened in `host`, as the audit takes them. */
export function demoAuditDirections(host: Workspace, names?: string[]): AuditDirection[] {
  return host
    .openDirections(join(demoDir, 'sigil-directions.npy'))
    .directions.map((d) => {
      const x = host.direction(d.id);
      return { name: x.name, target: x.target, layers: x.layers, vector: x.vector, sigma: x.sigma };
    })
    .filter((d) => !names || names.includes(d.name));
}
