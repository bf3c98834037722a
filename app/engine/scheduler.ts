// The scheduler: owns the three lanes and the one way to cancel.
//  - control: in arrival order, before anything else (and at every job checkpoint);
//  - preview: latest wins — a newer preview supersedes one that has not started — and a waiting
//    preview runs at the next job checkpoint, so it waits at most one job batch;
//  - job: queued, one at a time; a job awaits checkpoint() between batches.
// Cancelling is by request id only: the job's AbortSignal is aborted; a queued job settles as
// cancelled at once, a running one at its next checkpoint. onnxruntime's run() blocks the event
// loop, so fairness comes from small batches and yielding (setImmediate) at each checkpoint.
import type { Lane } from '../protocol/messages.ts';

export type Settlement =
  | { kind: 'done'; value: unknown }
  | { kind: 'cancelled' }
  | { kind: 'superseded' }
  | { kind: 'failed'; error: unknown };

export interface Task {
  /** Unique among the engine's pending requests (the web shell remaps its clients' ids to host-wide ones). */
  requestId: number;
  lane: Lane;
  /** Does the work; jobs await `checkpoint` between batches. */
  run(signal: AbortSignal, checkpoint: () => Promise<void>): Promise<unknown>;
  /** Called exactly once, with how the task ended. */
  settle(outcome: Settlement): void;
}

interface Entry {
  task: Task;
  controller: AbortController;
}

/** The reason a cancelled job's signal carries. */
export class CancelledByRequest extends Error {
  constructor(requestId: number) {
    super(`request ${requestId} was cancelled`);
    this.name = 'CancelledByRequest';
  }
}

const nextTurn = () => new Promise<void>((r) => setImmediate(r));

export class Scheduler {
  #control: Entry[] = [];
  #preview: Entry | null = null;
  #jobs: Entry[] = [];
  #running: Entry | null = null;
  #pumping = false;

  submit(task: Task): void {
    const entry = { task, controller: new AbortController() };
    if (task.lane === 'control') this.#control.push(entry);
    else if (task.lane === 'preview') {
      this.#preview?.task.settle({ kind: 'superseded' });
      this.#preview = entry;
    } else this.#jobs.push(entry);
    void this.#pump();
  }

  /** Cancels the job started by request `requestId`; false when there is no such queued or running job. */
  cancel(requestId: number): boolean {
    const match = (e: Entry) => e.task.requestId === requestId && !e.controller.signal.aborted;
    const queued = this.#jobs.find(match);
    if (queued) {
      this.#jobs.splice(this.#jobs.indexOf(queued), 1);
      queued.controller.abort(new CancelledByRequest(requestId));
      queued.task.settle({ kind: 'cancelled' });
      return true;
    }
    if (this.#running && match(this.#running)) {
      this.#running.controller.abort(new CancelledByRequest(requestId));
      return true;
    }
    return false;
  }

  /** Cancels every queued and running job (the generator they render with is going away). */
  cancelAll(): void {
    for (const e of [...this.#jobs]) this.cancel(e.task.requestId);
    if (this.#running) this.cancel(this.#running.task.requestId);
  }

  async #pump(): Promise<void> {
    if (this.#pumping) return;
    this.#pumping = true;
    try {
      for (;;) {
        if (this.#control.length || this.#preview) await this.#serveWaiting();
        else if (this.#jobs.length) {
          const entry = this.#jobs.shift()!;
          this.#running = entry;
          try {
            await this.#run(entry, () => this.#checkpoint(entry));
          } finally {
            this.#running = null;
          }
        } else break;
        await nextTurn();
      }
    } finally {
      this.#pumping = false;
    }
  }

  /** Control requests first, then the latest preview. */
  async #serveWaiting(): Promise<void> {
    while (this.#control.length) await this.#run(this.#control.shift()!, async () => {});
    if (this.#preview) {
      const preview = this.#preview;
      this.#preview = null;
      await this.#run(preview, async () => {});
    }
  }

  async #checkpoint(job: Entry): Promise<void> {
    job.controller.signal.throwIfAborted();
    await this.#serveWaiting();
    await nextTurn();
    job.controller.signal.throwIfAborted();
  }

  async #run(entry: Entry, checkpoint: () => Promise<void>): Promise<void> {
    const { task, controller } = entry;
    try {
      // A job that finished before reaching another checkpoint keeps its result.
      task.settle({ kind: 'done', value: await task.run(controller.signal, checkpoint) });
    } catch (error) {
      task.settle(controller.signal.aborted ? { kind: 'cancelled' } : { kind: 'failed', error });
    }
  }
}
