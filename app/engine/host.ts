// The engine host: one per engine process. Takes protocol messages from any number of ports,
// validates them, and hands each request to the scheduler as a task running the method's handler
// (app/engine/handlers/) against the one workspace. Answers go back on the port they came from:
// a job's outcome marked not cancelled, the one cancelled result, or an error from the catalogue.
import { toErrorData } from '../core/errors.ts';
import { PROTOCOL_VERSION, event, laneOf, parseMessage, type Cancelled, type Message, type Params, type RequestMessage, type ResponseMessage } from '../protocol/messages.ts';
import type { ErrorData } from '../protocol/errors.ts';
import { Scheduler, type Settlement } from './scheduler.ts';
import { Workspace } from './workspace.ts';
import { handlers } from './handlers/index.ts';
import { inSession } from './request-session.ts';
import type { Handler, HandlerContext } from './handlers/context.ts';

export { demoCardPath } from './workspace.ts';

export interface Port {
  post(message: Message): void;
}

const CANCELLED: Cancelled = { cancelled: true };

export class EngineHost {
  readonly workspace: Workspace;
  readonly #scheduler = new Scheduler();

  constructor(options: { threads?: number } = {}) {
    this.workspace = new Workspace(options);
  }

  /** Entry point for every incoming message from a port. Never throws. */
  receive(raw: unknown, port: Port): void {
    let message: Message;
    try {
      message = parseMessage(raw);
    } catch (err) {
      const id = typeof (raw as { id?: unknown })?.id === 'number' ? (raw as { id: number }).id : -1;
      port.post(errorResponse(id, toErrorData(err)));
      return;
    }
    if (message.type !== 'request') {
      port.post(errorResponse(-1, { code: 'protocol', message: `the engine accepts requests only, got a ${message.type}` }));
      return;
    }
    const req: RequestMessage = message;
    const lane = laneOf(req.method);
    const handler = handlers[req.method] as Handler<typeof req.method>;
    const jobs = { cancel: (requestId: number) => this.#scheduler.cancel(requestId), cancelAll: () => this.#scheduler.cancelAll() };
    this.#scheduler.submit({
      requestId: req.id,
      lane,
      run: (signal, checkpoint) => {
        const ctx: HandlerContext = {
          workspace: this.workspace,
          signal,
          checkpoint,
          jobs,
          progress: (p) => lane === 'job' && port.post(event('job.progress', { requestId: req.id, ...p })),
          event: (name, data) => port.post(event(name, data)),
          requestId: req.id,
        };
        // The request's window travels with everything the handler awaits (project writes check it).
        return inSession(req.session, () => Promise.resolve(handler(req.params as Params<typeof req.method>, ctx)));
      },
      settle: (outcome) => port.post(answer(req.id, lane === 'job', outcome)),
    });
  }

  async dispose(): Promise<void> {
    this.#scheduler.cancelAll();
    await this.workspace.dispose();
  }
}

function answer(id: number, job: boolean, outcome: Settlement): ResponseMessage {
  switch (outcome.kind) {
    case 'done':
      return { v: PROTOCOL_VERSION, type: 'response', id, ok: true, result: job ? { cancelled: false, ...(outcome.value as object) } : outcome.value };
    case 'cancelled':
      return { v: PROTOCOL_VERSION, type: 'response', id, ok: true, result: CANCELLED };
    case 'superseded':
      return { v: PROTOCOL_VERSION, type: 'response', id, ok: true, result: { superseded: true } };
    case 'failed':
      return errorResponse(id, toErrorData(outcome.error));
  }
}

function errorResponse(id: number, error: ErrorData): ResponseMessage {
  return { v: PROTOCOL_VERSION, type: 'response', id, ok: false, error };
}
