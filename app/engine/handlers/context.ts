// What every handler receives, and the handler type: one async function per protocol method,
// (params, ctx) → outcome. For a job the outcome excludes the cancelled alternative: a handler
// never builds { cancelled: true } itself — the scheduler answers it when the signal is aborted.
import type { EventData, EventName, Method, Outcome, Params } from '../../protocol/messages.ts';
import type { Workspace } from '../workspace.ts';
import type { WorkerProgress } from '../farm/coordinator.ts';

export interface Progress {
  done: number;
  total: number;
  label: string;
  /** On a farm: per-worker units, images and images/s. */
  workers?: WorkerProgress[];
}

export interface HandlerContext {
  workspace: Workspace;
  /** Reports a job's progress (ignored for control and preview requests). */
  progress(p: Progress): void;
  /** Awaited between batches: serves waiting previews and control requests, and throws once cancelled. */
  checkpoint(): Promise<void>;
  /** Aborted when the request is cancelled (job.cancel, a generator switch, Ctrl+C in the CLI). */
  signal: AbortSignal;
  /** The scheduler's jobs, for job.cancel and for cancelling everything on a generator switch. */
  jobs: { cancel(requestId: number): boolean; cancelAll(): void };
  /** Sends an event to the requester (absent in the CLI, which has no one to send it to). */
  event?<E extends EventName>(name: E, data: EventData<E>): void;
  /** The id of the request being handled (for events that name it). */
  requestId?: number;
}

export type Handler<M extends Method> = (params: Params<M>, ctx: HandlerContext) => Promise<Outcome<M>> | Outcome<M>;

/** Handlers of one area: a subset of the methods. */
export type AreaHandlers<K extends Method> = { [M in K]: Handler<M> };

/**
 * Drives a job written as an async generator of progress steps (audit, variants): forwards
 * progress at most every `every` steps (and the last), awaits a checkpoint at every step, and
 * closes the generator (releasing what it holds) when cancelled.
 */
export async function driveSteps<T>(steps: AsyncGenerator<Progress, T, void>, ctx: HandlerContext, every = 1): Promise<T> {
  let last = 0;
  try {
    for (;;) {
      const step = await steps.next();
      if (step.done) return step.value;
      if (step.value.done - last >= every || step.value.done === step.value.total) {
        last = step.value.done;
        ctx.progress(step.value);
      }
      await ctx.checkpoint();
    }
  } finally {
    await steps.return(undefined as never);
  }
}

/** Adds the latest per-worker figures (a farm job) to every progress step. */
export async function* withWorkers<T>(steps: AsyncGenerator<Progress, T, void>, workers: () => WorkerProgress[] | undefined): AsyncGenerator<Progress, T, void> {
  try {
    for (;;) {
      const step = await steps.next();
      if (step.done) return step.value;
      yield { ...step.value, workers: workers() };
    }
  } finally {
    await steps.return(undefined as never);
  }
}
