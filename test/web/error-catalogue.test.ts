// The error catalogue round-trips through the web shell: errors raised in the engine process
// (a pack that is not a ZIP archive — no "PK\x03\x04" local header, PKWARE APPNOTE §4.3.7 — a
// missing file, no generator open), by the web shell itself (a text frame, an engine that died
// mid-request) and by the client arrive as the same catalogue codes, and every code survives the
// binary framing and the receiving side's validation. A pack failure no longer arrives as 'internal'.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { join } from 'node:path';
import WebSocket from 'ws';
import { startWebShell, type WebShell } from '../../app/web/serve.ts';
import { decodeFrame, encodeFrame } from '../../app/protocol/frames.ts';
import { parseMessage, request, PROTOCOL_VERSION } from '../../app/protocol/messages.ts';
import { ERROR_CATALOGUE, ERROR_CODES } from '../../app/protocol/errors.ts';
import { tempDir, write } from '../helpers/models.ts';

let shell: WebShell;
let ws: WebSocket;
const inbox: any[] = [];

before(async () => {
  shell = await startWebShell({ quiet: true, threads: 1 });
  const { port, origin } = new URL(shell.url);
  ws = await new Promise<WebSocket>((ok, fail) => {
    const s = new WebSocket(`ws://127.0.0.1:${port}/engine?token=${shell.token}`, { headers: { origin } });
    s.once('open', () => ok(s));
    s.once('error', fail);
  });
  // Every frame is validated the way the renderer validates it: an unknown error code would throw here.
  ws.on('message', (data: Buffer) => inbox.push(parseMessage(decodeFrame(new Uint8Array(data)))));
});
after(async () => {
  ws.close();
  await shell.close();
});

async function answer(id: number, ms = 60_000) {
  const end = Date.now() + ms;
  for (;;) {
    const r = inbox.find((m) => m.type === 'response' && m.id === id);
    if (r) return r;
    if (Date.now() > end) throw new Error(`no answer to ${id}`);
    await new Promise((res) => setTimeout(res, 10));
  }
}

test('every catalogue code survives the binary framing and validation', () => {
  for (const code of ERROR_CODES) {
    const message = { v: PROTOCOL_VERSION, type: 'response' as const, id: 1, ok: false as const, error: { code, message: ERROR_CATALOGUE[code].title, file: '/tmp/x' } };
    assert.deepEqual(parseMessage(decodeFrame(encodeFrame(message))), message, code);
  }
  assert.throws(() => parseMessage({ v: PROTOCOL_VERSION, type: 'response', id: 1, ok: false, error: { code: 'made-up', message: 'x' } }), /bad response/);
});

test('engine errors arrive with their catalogue codes, a pack failure with its own', async () => {
  ws.send(encodeFrame(request(1, 'directions.list', {})));
  ws.send(encodeFrame(request(2, 'preview.render', { seed: 1, psi: 0.7, edits: [] })));
  assert.equal((await answer(2)).error.code, 'no-model');
  ws.send(encodeFrame(request(3, 'model.openDemo', {})));
  assert.equal((await answer(3)).ok, true);
  const dir = tempDir();
  const notZip = write(dir, 'broken.plpack', 'this is not a ZIP archive');
  ws.send(encodeFrame(request(4, 'pack.import', { path: notZip })));
  const packFailure = await answer(4);
  assert.equal(packFailure.ok, false);
  assert.equal(packFailure.error.code, 'pack-unreadable');
  assert.match(packFailure.error.message, /broken\.plpack/);
  ws.send(encodeFrame(request(5, 'pack.import', { path: join(dir, 'absent.plpack') })));
  const missing = await answer(5);
  assert.equal(missing.error.code, 'file-missing');
  assert.equal(missing.error.file, join(dir, 'absent.plpack'));
  ws.send(encodeFrame(request(6, 'pack.build', { out: join(dir, 'out.plpack') })));
  assert.equal((await answer(6)).error.code, 'bad-request', 'building a pack without a project');
});

test('the web shell\'s own errors use the catalogue: a text frame, and an engine that dies mid-request', async () => {
  ws.send('{"not":"binary"}');
  const end = Date.now() + 10_000;
  while (!inbox.some((m) => m.id === -1 && m.error?.code === 'protocol') && Date.now() < end) await new Promise((r) => setTimeout(r, 10));
  assert.ok(inbox.some((m) => m.id === -1 && m.error?.code === 'protocol'));
  ws.send(encodeFrame(request(10, 'grid.render', { seeds: Array.from({ length: 256 }, (_, i) => i), psi: 0.7 })));
  while (!inbox.some((m) => m.type === 'event' && m.data.requestId === 10) && Date.now() < end + 60_000) await new Promise((r) => setTimeout(r, 10));
  shell.killEngine();
  const r = await answer(10);
  assert.equal(r.ok, false);
  assert.equal(r.error.code, 'engine-stopped');
});
