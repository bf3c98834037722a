// Handlers for the engine itself: the hello handshake and cancelling a job by its request id.
import { PROTOCOL_VERSION } from '../../protocol/messages.ts';
import { ENGINE_NAME } from '../../protocol/version.ts';
import type { AreaHandlers } from './context.ts';

export const engineHandlers: AreaHandlers<'engine.hello' | 'job.cancel'> = {
  'engine.hello': (_p, { workspace }) => ({ protocol: PROTOCOL_VERSION, engine: ENGINE_NAME, threads: workspace.threads, model: workspace.generator?.info ?? null }),
  'job.cancel': (p, { jobs }) => ({ cancelled: jobs.cancel(p.requestId) }),
};
