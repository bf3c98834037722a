// The web shell: loopback only, token and Origin checks on the engine socket, CSP on every page,
// no path escapes, binary frames, and a killed engine reported as a typed event and restarted.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { get } from 'node:http';
import WebSocket from 'ws';
import { startWebShell, type WebShell } from '../../app/web/serve.ts';
import { decodeFrame, encodeFrame } from '../../app/protocol/frames.ts';
import { request } from '../../app/protocol/messages.ts';

let shell: WebShell;
let origin: string;

before(async () => {
  shell = await startWebShell({ quiet: true, threads: 1 });
  origin = new URL(shell.url).origin;
});
after(async () => shell.close());

function fetchRaw(path: string): Promise<{ status: number; headers: Record<string, unknown>; body: string }> {
  return new Promise((ok, fail) => {
    get(`${origin}${path}`, (res) => {
      let body = '';
      res.on('data', (c) => (body += c));
      res.on('end', () => ok({ status: res.statusCode ?? 0, headers: res.headers, body }));
    }).on('error', fail);
  });
}

function connect(url: string, headers: Record<string, string> = { origin }): Promise<WebSocket> {
  return new Promise((ok, fail) => {
    const ws = new WebSocket(url, { headers });
    ws.once('open', () => ok(ws));
    ws.once('unexpected-response', (_req, res) => fail(new Error(`HTTP ${res.statusCode}`)));
    ws.once('error', fail);
  });
}

test('listens on 127.0.0.1 with a long random token in the URL', () => {
  const u = new URL(shell.url);
  assert.equal(u.hostname, '127.0.0.1');
  assert.match(u.searchParams.get('token') ?? '', /^[0-9a-f]{48}$/);
});

test('pages carry a strict content security policy; paths cannot escape the renderer folder', async () => {
  const page = await fetchRaw('/');
  assert.equal(page.status, 200);
  const csp = String(page.headers['content-security-policy']);
  assert.match(csp, /default-src 'none'/);
  assert.match(csp, /script-src 'self'/);
  assert.doesNotMatch(csp, /unsafe-eval/);
  for (const p of ['/..%2f..%2fpackage.json', '/%2e%2e/%2e%2e/package.json', '/../../package.json']) assert.equal((await fetchRaw(p)).status, 404, p);
});

test('the engine socket refuses a missing or wrong token and a foreign origin', async () => {
  const base = `ws://127.0.0.1:${new URL(shell.url).port}/engine`;
  await assert.rejects(connect(base), /HTTP 403/);
  await assert.rejects(connect(`${base}?token=${'0'.repeat(48)}`), /HTTP 403/);
  await assert.rejects(connect(`${base}?token=${shell.token}`, { origin: 'http://evil.example' }), /HTTP 403/);
});

test('requests go through as binary frames; a killed engine is reported and restarted', async () => {
  const ws = await connect(`ws://127.0.0.1:${new URL(shell.url).port}/engine?token=${shell.token}`);
  const inbox: any[] = [];
  ws.on('message', (data: Buffer) => inbox.push(decodeFrame(new Uint8Array(data))));
  const until = async (pred: () => boolean, ms = 30000) => {
    const end = Date.now() + ms;
    while (!pred()) {
      if (Date.now() > end) throw new Error(`timed out; got ${JSON.stringify(inbox.map((m) => m.event ?? m.id))}`);
      await new Promise((r) => setTimeout(r, 10));
    }
  };
  ws.send(encodeFrame(request(1, 'model.openDemo', {})));
  await until(() => inbox.some((m) => m.id === 1));
  ws.send(encodeFrame(request(2, 'preview.render', { seed: 4, psi: 0.7, edits: [] })));
  await until(() => inbox.some((m) => m.id === 2));
  const r = inbox.find((m) => m.id === 2);
  assert.ok(r.ok, JSON.stringify(r.error));
  assert.ok(r.result.image.rgba instanceof Uint8Array);
  assert.equal(r.result.image.rgba.length, 128 * 128 * 4);
  ws.send('{"not":"binary"}');
  await until(() => inbox.some((m) => m.id === -1 && m.error?.code === 'protocol'));

  shell.killEngine();
  await until(() => inbox.some((m) => m.event === 'engine.stopped'));
  const stopped = inbox.find((m) => m.event === 'engine.stopped');
  assert.equal(stopped.data.restarting, true);
  await until(() => inbox.some((m) => m.event === 'engine.ready' && m.data.restarted === true));
  ws.send(encodeFrame(request(3, 'model.openDemo', {})));
  await until(() => inbox.some((m) => m.id === 3));
  assert.equal(inbox.find((m) => m.id === 3).ok, true, 'the restarted engine serves again');
  ws.close();
});
