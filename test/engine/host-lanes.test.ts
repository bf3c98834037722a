// Engine host scheduling: previews coalesce (latest wins) and never wait behind more than one
// job batch; jobs stream progress and cancel between batches; bad messages get typed errors.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { EngineHost, demoCardPath } from '../../app/engine/host.ts';
import { request } from '../../app/protocol/messages.ts';

let host: EngineHost;
const got: any[] = [];
const port = { post: (m: unknown) => got.push(m) };
let nextId = 100;

before(async () => {
  host = new EngineHost({ threads: 1 });
  await host.workspace.openModel(demoCardPath());
});
after(async () => host.dispose());

async function until(pred: () => boolean, ms = 30000) {
  const end = Date.now() + ms;
  while (!pred()) {
    if (Date.now() > end) throw new Error('timed out');
    await new Promise((r) => setTimeout(r, 5));
  }
}
const response = (id: number) => got.find((m) => m.type === 'response' && m.id === id);

test('a burst of previews renders the first and the last; the middle ones are superseded', async () => {
  const ids = [nextId++, nextId++, nextId++, nextId++];
  for (const id of ids) host.receive(request(id, 'preview.render', { seed: 7, psi: 0.7, edits: [] }), port);
  await until(() => ids.every((id) => response(id)));
  const flags = ids.map((id) => response(id).result.superseded);
  assert.deepEqual(flags, [false, true, true, false]);
});

test('a preview arriving behind a long job waits at most one batch', async () => {
  const job = nextId++;
  const seeds = Array.from({ length: 160 }, (_, i) => i);
  host.receive(request(job, 'grid.render', { seeds, psi: 0.7 }), port);
  await until(() => got.some((m) => m.type === 'event' && m.data.requestId === job));
  const preview = nextId++;
  const progressBefore = got.filter((m) => m.type === 'event' && m.data.requestId === job).length;
  host.receive(request(preview, 'preview.render', { seed: 1, psi: 0.7, edits: [] }), port);
  await until(() => !!response(job));
  const order = got.filter((m) => (m.type === 'event' && m.data.requestId === job) || m.id === preview || m.id === job);
  const previewAt = order.findIndex((m) => m.id === preview);
  const progressAfterRequestBeforePreview = order.slice(0, previewAt).filter((m) => m.type === 'event').length - progressBefore;
  assert.ok(previewAt >= 0 && previewAt < order.findIndex((m) => m.id === job), 'preview answered before the job finished');
  assert.ok(progressAfterRequestBeforePreview <= 1, `preview waited ${progressAfterRequestBeforePreview} batches`);
  assert.equal(response(job).result.images.length, 160);
});

test('a job cancelled between batches answers cancelled and stops early', async () => {
  const job = nextId++;
  host.receive(request(job, 'grid.render', { seeds: Array.from({ length: 256 }, (_, i) => i), psi: 0.7 }), port);
  await until(() => got.some((m) => m.type === 'event' && m.data.requestId === job));
  const cancel = nextId++;
  host.receive(request(cancel, 'job.cancel', { requestId: job }), port);
  await until(() => !!response(job));
  assert.equal(response(cancel).result.cancelled, true);
  assert.deepEqual(response(job).result, { cancelled: true });
  const progress = got.filter((m) => m.type === 'event' && m.data.requestId === job);
  assert.ok(progress.length < 15, `ran ${progress.length} of 16 batches`);
  assert.ok(progress.every((p) => p.data.total === 256 && p.data.done <= 256));
});

test('malformed messages get a typed protocol error and the host keeps working', async () => {
  host.receive({ nonsense: true }, port);
  host.receive({ v: 1, type: 'request', id: 5000, method: 'preview.render', params: { seed: 'x' } }, port);
  await until(() => !!response(5000));
  assert.equal(response(5000).error.code, 'protocol');
  assert.match(response(5000).error.message, /bad parameters for preview.render: seed/);
  assert.ok(got.some((m) => m.id === -1 && m.error?.code === 'protocol'));
  const id = nextId++;
  host.receive(request(id, 'preview.render', { seed: 2, psi: 0.7, edits: [{ direction: 'no-such', strength: 1 }] }), port);
  await until(() => !!response(id));
  assert.match(response(id).error.message, /unknown direction 'no-such'/);
});

test('switching generators releases the previous sessions', async () => {
  const first = host.workspace.generator!;
  await host.workspace.openModel(demoCardPath());
  assert.equal(first.disposed, true);
  assert.notEqual(host.workspace.generator, first);
});
