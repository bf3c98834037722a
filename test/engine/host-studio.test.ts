// The engine host's studio methods through the protocol: discovery candidates with strips, keep,
// audit as a cancellable job with progress, repair, and a project folder with an append-only
// review log whose approvals reset when a direction changes.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, existsSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { EngineHost } from '../../app/engine/host.ts';
import { request, type Method, type Params } from '../../app/protocol/messages.ts';
import { callHostChecked } from '../helpers/host.ts';
import { tempDir } from '../helpers/models.ts';

let host: EngineHost;
const inbox: any[] = [];
const port = { post: (m: unknown) => inbox.push(m) };
let nextId = 1;

const call = <M extends Method>(method: M, params: Params<M>, onEvent?: (e: any) => void) => callHostChecked(host, method, params, onEvent, 120_000);

before(async () => {
  host = new EngineHost({ threads: 1 });
  await call('model.openDemo', {});
  await call('directions.open', { path: join(import.meta.dirname, '..', '..', 'resources', 'demo', 'sigil-directions.npy') });
});
after(async () => host.dispose());

test('discovery returns candidates with strips; keeping one adds it to the list', async () => {
  const r = await call('lab.discover', { method: 'sefa', components: 3, samples: 500, seed: 1, layers: null, positive: [], negative: [], stripSeeds: [0, 1], stripStrengths: [-2, 0, 2] });
  assert.equal(r.cancelled, false);
  if (r.cancelled) return;
  assert.equal(r.candidates.length, 3);
  assert.equal(r.candidates[0].strip.length, 6);
  assert.equal(r.candidates[0].strip[0].width, 64);
  assert.equal(r.candidates[0].direction.kept, false);
  const before = (await call('directions.list', {})).directions.length;
  const kept = await call('directions.keep', { id: r.candidates[0].direction.id, name: 'sefa_top' });
  assert.equal(kept.kept, true);
  assert.equal((await call('directions.list', {})).directions.length, before + 1);
  assert.equal(kept.source.method, 'sefa');
});

test('an audit runs as a job with progress, answers with the report and binary thumbnails, and can be cancelled', async () => {
  const list = (await call('directions.list', {})).directions;
  const ids = list.filter((d) => ['outline_bold', 'turn'].includes(d.name)).map((d) => d.id);
  const progress: any[] = [];
  const r = await call('audit.run', { directions: ids, probes: 8, pinnedSeeds: [], psi: 0.7, seed: 1, referenceStrength: 2, leakPass: 0.15, leakFail: 0.35, nullDirections: 8, combinations: 'all' }, (e) => progress.push(e));
  assert.ok(progress.length > 0 && progress.every((p) => p.event === 'job.progress'));
  assert.equal(r.cancelled, false);
  if (r.cancelled) return;
  const turnReport = r.report.directions.find((d) => d.name === 'turn')!;
  assert.equal(turnReport.verdict, 'review', 'clean, but 8 probes are too few to pass');
  assert.match(turnReport.reason, /too few probes/);
  assert.equal(r.report.directions.find((d) => d.name === 'outline_bold')!.verdict, 'fail');
  assert.ok(r.thumbnails.length > 0 && r.thumbnails[0].before instanceof Uint8Array);
  assert.deepEqual(Array.from(r.thumbnails[0].before.subarray(1, 4), (b) => String.fromCharCode(b)), ['P', 'N', 'G']);

  // Cancel a long audit after its first progress event.
  const id = nextId++;
  let sawProgress = false;
  host.receive(request(id, 'audit.run', { directions: ids, probes: 400, pinnedSeeds: [], psi: 0.7, seed: 1, referenceStrength: 2, leakPass: 0.15, leakFail: 0.35, nullDirections: 8, combinations: 'none' }), { post: (m: any) => { if (m.type === 'event' && m.data.requestId === id) sawProgress = true; inbox.push(m); } });
  while (!sawProgress) await new Promise((res) => setTimeout(res, 10));
  host.receive(request(nextId++, 'job.cancel', { requestId: id }), port);
  for (;;) {
    const resp = inbox.find((m) => m.type === 'response' && m.id === id);
    if (resp) {
      assert.deepEqual(resp.result, { cancelled: true });
      break;
    }
    await new Promise((res) => setTimeout(res, 10));
  }
});

test('a project keeps directions, audits and an append-only review log; approvals reset when a direction changes', async () => {
  const dir = tempDir();
  const opened = await call('project.open', { path: dir, create: true });
  assert.equal(opened.generatorMatches, true);
  assert.ok(existsSync(join(dir, 'project.json')) && existsSync(join(dir, 'directions', 'turn.npy')));
  const turn = opened.directions.find((d) => d.name === 'turn')!;
  assert.equal(turn.signOff?.status, 'draft');
  await call('project.review', { direction: turn.id, status: 'in-review', reviewer: 'Ines', note: 'looks clean' });
  // Never audited: a plain approval is refused (issue 11), an override with a reason is recorded.
  await assert.rejects(call('project.review', { direction: turn.id, status: 'approved', reviewer: 'Ines', note: 'ship it' }), /cannot be approved plainly: never audited/);
  const approved = await call('project.review', { direction: turn.id, status: 'approved', reviewer: 'Ines', note: 'ship it', override: 'demo direction with documented truth' });
  assert.equal(approved.signOff.status, 'approved');
  assert.equal(approved.signOff.history.length, 2);
  const log = readFileSync(join(dir, 'review-log.jsonl'), 'utf8').trim().split('\n');
  assert.equal(log.length, 2);
  assert.equal(JSON.parse(log[1]).reviewer, 'Ines');
  assert.equal(JSON.parse(log[1]).override, 'demo direction with documented truth');
  await call('project.saveUi', { seed: 12, psi: 0.6, strengths: { [turn.id]: 1.5 }, pinned: [3, 4], tags: { '7': 'has' } });

  // Someone edits the saved direction file: reopening shows the approval reset, history intact.
  const npy = join(dir, 'directions', 'turn.npy');
  const bytes = readFileSync(npy);
  const view = new DataView(bytes.buffer, bytes.byteOffset);
  view.setFloat32(128, view.getFloat32(128, true) + 0.05, true);
  writeFileSync(npy, bytes);
  const reopened = await call('project.open', { path: dir, create: false });
  const again = reopened.directions.find((d) => d.name === 'turn')!;
  assert.equal(again.signOff?.status, 'in-review');
  assert.equal(again.signOff?.approvalReset, true);
  assert.equal(again.signOff?.history.length, 2);
  assert.deepEqual(reopened.ui?.pinned, [3, 4]);
  assert.equal(reopened.ui?.seed, 12);
});

test('repair through the host adds a repaired direction with its parent recorded', async () => {
  const list = (await call('directions.list', {})).directions;
  const ob = list.find((d) => d.name === 'outline_bold')!;
  const r = await call('lab.repair', { direction: ob.id, against: ['backdrop'], hold: 'others' });
  assert.equal(r.cancelled, false);
  if (r.cancelled) return;
  assert.equal(r.direction.name, 'outline_bold_repaired');
  assert.equal(r.direction.source.parent, 'outline_bold');
  assert.ok(r.boundaries.some((b) => b.role === 'removed' && b.attribute === 'backdrop'));
});
