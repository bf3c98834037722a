// Runs engine work from the command line through the same handler context the engine gives its
// jobs: progress goes to a progress bar on a TTY, and Ctrl+C aborts the same AbortSignal a
// job.cancel would, so the work stops at its next checkpoint (exit code 130).
import type { HandlerContext } from '../engine/handlers/context.ts';
import type { Workspace } from '../engine/workspace.ts';
import type { CliContext } from './lab-commands.ts';

const nextTurn = () => new Promise<void>((r) => setImmediate(r));

/** Runs `work` with a CLI handler context; null when Ctrl+C cancelled it (after saying so). */
export async function runCliJob<T>(ctx: CliContext, workspace: Workspace, label: string, cancelledMessage: string, work: (job: HandlerContext) => Promise<T>): Promise<T | null> {
  let bar: ReturnType<CliContext['progressBar']> | null = null;
  const signal = ctx.interrupt;
  const job: HandlerContext = {
    workspace,
    signal,
    progress: (p) => {
      bar ??= ctx.progressBar(p.total, label);
      bar.update(p.done);
    },
    checkpoint: async () => {
      signal.throwIfAborted();
      await nextTurn();
      signal.throwIfAborted();
    },
    // One job per command: nothing else to cancel.
    jobs: { cancel: () => false, cancelAll: () => {} },
  };
  try {
    return await work(job);
  } catch (err) {
    if (!signal.aborted) throw err;
    process.stderr.write(`${cancelledMessage}\n`);
    process.exitCode = 130;
    return null;
  } finally {
    (bar as ReturnType<CliContext['progressBar']> | null)?.stop();
  }
}
