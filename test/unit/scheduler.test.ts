// The scheduler's rules, one test each, with plain tasks (no generator): the latest preview wins,
// jobs queue one at a time, cancelling by request id aborts a running job at its next checkpoint
// (through the platform's AbortSignal, WHATWG DOM "AbortController": abort() sets `aborted` and
// `reason`, throwIfAborted() throws the reason), and a cancelled job ends with the one cancelled
// result declared in the protocol.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { Scheduler, type Settlement, type Task } from '../../app/engine/scheduler.ts';
import { cancelledSchema, methods, resultSchemas, type Method } from '../../app/protocol/messages.ts';

interface Probe {
  task: Task;
  settled: Settlement[];
  started: boolean;
}

/** A task whose work is `body`; records when it starts and how it settles. */
function probe(requestId: number, lane: Task['lane'], body: (signal: AbortSignal, checkpoint: () => Promise<void>) => Promise<unknown> = async () => requestId): Probe {
  const p: Probe = { settled: [], started: false, task: null as never };
  p.task = {
    requestId,
    lane,
    run: (signal, checkpoint) => {
      p.started = true;
      return body(signal, checkpoint);
    },
    settle: (o) => p.settled.push(o),
  };
  return p;
}

const until = async (pred: () => boolean) => {
  for (let i = 0; i < 2000 && !pred(); i++) await new Promise((r) => setTimeout(r, 1));
  assert.ok(pred(), 'timed out');
};
/** A promise and its resolver, to hold a task mid-run. */
function gate() {
  let open!: () => void;
  const done = new Promise<void>((r) => (open = r));
  return { done, open };
}

test('latest preview wins: previews that have not started are superseded by newer ones', async () => {
  const s = new Scheduler();
  const hold = gate();
  const first = probe(1, 'preview', async () => (await hold.done, 'first'));
  const middle = [probe(2, 'preview'), probe(3, 'preview')];
  const last = probe(4, 'preview', async () => 'last');
  for (const p of [first, ...middle, last]) s.submit(p.task);
  hold.open();
  await until(() => last.settled.length === 1);
  assert.deepEqual(first.settled, [{ kind: 'done', value: 'first' }], 'the one already running finishes');
  for (const m of middle) {
    assert.deepEqual(m.settled, [{ kind: 'superseded' }]);
    assert.equal(m.started, false, 'a superseded preview never renders');
  }
  assert.deepEqual(last.settled, [{ kind: 'done', value: 'last' }]);
});

test('jobs queue: one at a time, in order, and a preview is served at the running job\'s next checkpoint', async () => {
  const s = new Scheduler();
  const order: string[] = [];
  const hold = gate();
  const job = (id: number) => probe(id, 'job', async (_signal, checkpoint) => {
    order.push(`start ${id}`);
    if (id === 1) await hold.done;
    await checkpoint();
    order.push(`end ${id}`);
    return id;
  });
  const [a, b] = [job(1), job(2)];
  s.submit(a.task);
  s.submit(b.task);
  const preview = probe(9, 'preview', async () => void order.push('preview'));
  await until(() => a.started);
  s.submit(preview.task);
  assert.equal(b.started, false, 'the second job waits for the first');
  hold.open();
  await until(() => b.settled.length === 1);
  assert.deepEqual(order, ['start 1', 'preview', 'end 1', 'start 2', 'end 2']);
  assert.deepEqual([a.settled, b.settled], [[{ kind: 'done', value: 1 }], [{ kind: 'done', value: 2 }]]);
});

test('cancel by request id aborts a running job at its next checkpoint, and a queued one at once', async () => {
  const s = new Scheduler();
  let batches = 0;
  let reason: unknown;
  const running = probe(5, 'job', async (signal, checkpoint) => {
    signal.addEventListener('abort', () => (reason = signal.reason));
    for (;;) {
      batches++;
      await checkpoint();
    }
  });
  const queued = probe(6, 'job');
  s.submit(running.task);
  s.submit(queued.task);
  await until(() => batches >= 3);
  assert.equal(s.cancel(42), false, 'no job has that request id');
  assert.equal(s.cancel(6), true);
  assert.deepEqual(queued.settled, [{ kind: 'cancelled' }], 'a queued job is answered at once');
  assert.equal(queued.started, false);
  assert.equal(s.cancel(5), true);
  const at = batches;
  await until(() => running.settled.length === 1);
  assert.ok(batches - at <= 1, `ran ${batches - at} more batches after the cancel`);
  assert.deepEqual(running.settled, [{ kind: 'cancelled' }]);
  assert.match(String(reason), /request 5 was cancelled/);
  assert.equal(s.cancel(5), false, 'a finished job cannot be cancelled again');
});

test('a cancelled job ends with the one cancelled result, which every job method accepts', async () => {
  const s = new Scheduler();
  const failing = probe(7, 'job', async (_signal, checkpoint) => {
    await checkpoint();
    throw new Error('would be an error if it were not cancelled');
  });
  s.submit(failing.task);
  s.cancel(7);
  await until(() => failing.settled.length === 1);
  assert.deepEqual(failing.settled, [{ kind: 'cancelled' }], 'cancellation is a result, not an error');
  const jobs = (Object.keys(methods) as Method[]).filter((m) => methods[m].lane === 'job');
  assert.deepEqual(jobs.sort(), ['audit.run', 'grid.render', 'lab.discover', 'lab.repair', 'variants.render']);
  for (const m of jobs) {
    assert.deepEqual(resultSchemas[m].parse({ cancelled: true }), cancelledSchema.parse({ cancelled: true }), m);
    // The outcome schemas themselves never mention cancellation: it is declared once.
    assert.equal('cancelled' in (methods[m].result as unknown as { shape: object }).shape, false, m);
  }
  for (const m of (Object.keys(methods) as Method[]).filter((x) => methods[x].lane !== 'job')) assert.equal(resultSchemas[m].safeParse({ cancelled: true }).success, m === 'job.cancel', m);
});
