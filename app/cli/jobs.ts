// Runs an engine job (an async generator yielding progress) from the command line: a progress
// bar on a TTY, and Ctrl+C stops it between batches with exit code 130.
import type { CliContext } from './lab-commands.ts';

export async function driveJob<T>(job: AsyncGenerator<{ done: number; total: number }, T, void>, ctx: CliContext, label: string, cancelledMessage: string): Promise<T | null> {
  let bar: ReturnType<CliContext['progressBar']> | null = null;
  try {
    for (;;) {
      if (ctx.isCancelled()) {
        await job.return(undefined as never);
        process.stderr.write(`${cancelledMessage}\n`);
        process.exitCode = 130;
        return null;
      }
      const step = await job.next();
      if (step.done) return step.value;
      bar ??= ctx.progressBar(step.value.total, label);
      bar.update(step.value.done);
    }
  } finally {
    bar?.stop();
  }
}
