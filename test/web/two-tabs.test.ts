// Two tabs of one web shell on one project (issue 11, part 3): the second opens read-only, and the
// engine itself refuses its writes — not only the second tab's interface — while the lock holder's
// writes go through. The shell decides which session a connection speaks for, so a tab cannot
// borrow the holder's session by putting it in the envelope. When the holder lets go, the other
// tab can take the project over.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import WebSocket from 'ws';
import { startWebShell, type WebShell } from '../../app/web/serve.ts';
import { decodeFrame, encodeFrame } from '../../app/protocol/frames.ts';
import { request, type Method } from '../../app/protocol/messages.ts';

let shell: WebShell;
let dir: string;

before(async () => {
  shell = await startWebShell({ quiet: true, threads: 1 });
  dir = mkdtempSync(join(tmpdir(), 'plumbline-two-tabs-'));
});
after(async () => {
  await shell.close();
  rmSync(dir, { recursive: true, force: true });
});

/** One tab's engine connection: `call` answers with the response message (ok or not). */
async function tab() {
  const origin = new URL(shell.url).origin;
  const ws = new WebSocket(`ws://127.0.0.1:${new URL(shell.url).port}/engine?token=${shell.token}`, { headers: { origin } });
  await new Promise((ok, fail) => (ws.once('open', ok), ws.once('error', fail)));
  const inbox = new Map<number, any>();
  ws.on('message', (data: Buffer) => {
    const m = decodeFrame(new Uint8Array(data)) as any;
    if (m.type === 'response') inbox.set(m.id, m);
  });
  let next = 1;
  return {
    ws,
    async call(method: Method, params: unknown, envelope: Record<string, unknown> = {}): Promise<any> {
      const id = next++;
      ws.send(encodeFrame({ ...request(id, method, params as never), ...envelope }));
      const end = Date.now() + 60_000;
      while (!inbox.has(id)) {
        if (Date.now() > end) throw new Error(`${method}: no answer`);
        await new Promise((r) => setTimeout(r, 10));
      }
      return inbox.get(id);
    },
  };
}

const ui = (seed: number) => ({ seed, psi: 0.7, strengths: {}, pinned: [], tags: {} });
const savedSeed = (project: string) => JSON.parse(readFileSync(join(project, 'project.json'), 'utf8')).ui?.seed;

test('the second tab is read-only in the engine, not only on screen; the lock can change hands', async () => {
  const project = join(dir, 'shared');
  const a = await tab();
  const b = await tab();
  try {
    assert.ok((await a.call('model.openDemo', {})).ok);
    assert.ok((await a.call('directions.open', { path: join(import.meta.dirname, '..', '..', 'resources', 'demo', 'sigil-directions.npy') })).ok);
    const openedA = await a.call('project.open', { path: project, create: true, session: 'tab-aaaa' });
    assert.ok(openedA.ok, JSON.stringify(openedA.error));
    assert.equal(openedA.result.readOnly, false);
    const openedB = await b.call('project.open', { path: project, create: false, session: 'tab-bbbb' });
    assert.ok(openedB.ok, JSON.stringify(openedB.error));
    assert.equal(openedB.result.readOnly, true);
    // The holder is named by process, machine and time — never by its session id, which would let
    // another tab speak for it.
    assert.equal(typeof openedB.result.lockHolder.pid, 'number');
    assert.equal('session' in openedB.result.lockHolder, false);
    assert.doesNotMatch(JSON.stringify(openedB.result), /tab-aaaa/);

    // The holder writes; the second tab's write is refused by the engine and nothing changes on disk.
    assert.ok((await a.call('project.saveUi', ui(11))).ok);
    assert.equal(savedSeed(project), 11);
    const refused = await b.call('project.saveUi', ui(22));
    assert.equal(refused.ok, false);
    assert.match(refused.error.message, /opened read-only — another window .* has this project open/);
    assert.equal(savedSeed(project), 11);

    // Claiming the holder's session in the envelope does not help: the shell stamps its own.
    const forged = await b.call('project.saveUi', ui(33), { session: 'tab-aaaa' });
    assert.equal(forged.ok, false);
    assert.match(forged.error.message, /read-only/);
    // Sign-off from the second tab is refused too (the review log is a project write).
    const direction = openedA.result.directions[0];
    assert.ok(direction, 'a new project starts with the directions on the workbench');
    const review = await b.call('project.review', { direction: direction.id, status: 'in-review', reviewer: 'B', note: '' });
    assert.equal(review.ok, false);
    assert.match(review.error.message, /read-only/);
    assert.equal(savedSeed(project), 11);

    // Nor can it switch its connection to the holder's session once it has declared its own.
    const switched = await b.call('project.lock', { session: 'tab-aaaa', release: false });
    assert.equal(switched.ok, false);
    assert.match(switched.error.message, /already has a session/);
    assert.equal((await b.call('project.saveUi', ui(35))).ok, false);
    assert.equal(savedSeed(project), 11);

    // A third connection that never declared a session cannot write either.
    const c = await tab();
    try {
      const anonymous = await c.call('project.saveUi', ui(44));
      assert.equal(anonymous.ok, false);
      assert.match(anonymous.error.message, /read-only/);
    } finally {
      c.ws.close();
    }

    // The second tab renewing its read-only lock does not make the holder read-only.
    const renewB = await b.call('project.lock', { session: 'tab-bbbb', release: false });
    assert.equal(renewB.result.readOnly, true);
    assert.ok((await a.call('project.saveUi', ui(55))).ok);
    assert.equal(savedSeed(project), 55);

    // The holder lets go (its page closes); the other tab takes the lock and now it writes, the
    // former holder does not.
    assert.ok((await a.call('project.lock', { session: 'tab-aaaa', release: true })).ok);
    const takeB = await b.call('project.lock', { session: 'tab-bbbb', release: false });
    assert.equal(takeB.result.readOnly, false);
    assert.ok((await b.call('project.saveUi', ui(66))).ok);
    assert.equal(savedSeed(project), 66);
    const late = await a.call('project.saveUi', ui(77));
    assert.equal(late.ok, false);
    assert.equal(savedSeed(project), 66);
  } finally {
    a.ws.close();
    b.ws.close();
  }
});
