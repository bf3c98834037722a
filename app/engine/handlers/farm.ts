// Handlers for the render farm setting: connect (address and password, kept in memory by the
// engine), disconnect, and status (workers and recent runs). Audit and variant-set handlers use
// the connection while it lasts.
import type { AreaHandlers } from './context.ts';

export const farmHandlers: AreaHandlers<'farm.connect' | 'farm.disconnect' | 'farm.status'> = {
  'farm.connect': (p, { workspace }) => workspace.farm.connect(p.url, p.password),
  'farm.disconnect': (_p, { workspace }) => workspace.farm.disconnect(),
  'farm.status': (_p, { workspace }) => workspace.farm.status(),
};
