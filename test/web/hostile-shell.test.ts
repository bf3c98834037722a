// The web shell against hostile pages and clients (issue 10): malformed URLs ('%', '//['),
// foreign Host headers (DNS rebinding), cross-site no-cors requests, an oversized frame from an
// authenticated client, and fast-check fuzzing of raw request paths. The shell runs in its own
// process so a crash shows as an exit, not as a dead test runner.
// Outside references: RFC 9110 §15.5.1 (400 for a malformed request), RFC 6455 §7.4.1 (close code
// 1009 "message too big"), W3C Fetch Metadata Request Headers (Sec-Fetch-Site values).
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { spawn, type ChildProcess } from 'node:child_process';
import { connect as tcp } from 'node:net';
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import WebSocket from 'ws';
import fc from 'fast-check';
import { decodeFrame, encodeFrame } from '../../app/protocol/frames.ts';
import { request } from '../../app/protocol/messages.ts';
import { tempDir } from '../helpers/models.ts';

const root = join(import.meta.dirname, '..', '..');
let child: ChildProcess;
let port: number;
let token: string;
let exited: string | null = null;

before(async () => {
  const renderer = join(tempDir(), 'renderer');
  mkdirSync(renderer);
  writeFileSync(join(renderer, 'index.html'), '<!doctype html><title>stand-in</title>');
  child = spawn(process.execPath, ['--import', 'tsx', join(root, 'test', 'helpers', 'web-shell-child.ts'), renderer], { cwd: root, stdio: ['ignore', 'pipe', 'inherit'] });
  child.on('exit', (code, signal) => (exited = `exit ${code ?? signal}`));
  const line = await new Promise<string>((ok, fail) => {
    let buf = '';
    child.stdout!.on('data', (c) => {
      buf += c;
      if (buf.includes('\n')) ok(buf.split('\n')[0]);
    });
    child.once('exit', () => fail(new Error('web shell exited before printing its URL')));
  });
  const info = JSON.parse(line);
  port = Number(new URL(info.url).port);
  token = info.token;
});
after(() => {
  child.kill('SIGTERM');
});

/** One raw HTTP/1.1 request; resolves with the status code (0 when the server closed without answering). */
function raw(path: string, headers: Record<string, string> = {}): Promise<number> {
  return new Promise((ok) => {
    const s = tcp(port, '127.0.0.1');
    let got = '';
    s.on('data', (c) => (got += c));
    s.on('error', () => {});
    s.on('close', () => ok(Number(/^HTTP\/1\.1 (\d{3})/.exec(got)?.[1] ?? 0)));
    const h = { host: `127.0.0.1:${port}`, connection: 'close', ...headers };
    s.write(`GET ${path} HTTP/1.1\r\n${Object.entries(h).map(([k, v]) => `${k}: ${v}`).join('\r\n')}\r\n\r\n`);
  });
}

const alive = async () => {
  assert.equal(exited, null, `the web shell died (${exited})`);
  assert.equal(await raw('/'), 200, 'the shell still serves its page');
};

test('malformed URLs get 400 and the shell keeps running', async () => {
  for (const p of ['/%', '//[', '/%E0%A4%A', '/a%00b', '//[::1', '/%%%']) {
    const status = await raw(p);
    assert.ok(status === 400 || status === 404, `${p} answered ${status}`);
    await alive();
  }
  assert.equal(await raw('/%'), 400, "'%' starts an escape that is not there");
  // '//[' is a path here (never a host): harmless, just not found.
  assert.equal(await raw('//['), 404);
});

test('Host headers that do not name the loopback address are refused; localhost is accepted', async () => {
  assert.equal(await raw('/', { host: 'evil.example' }), 400);
  assert.equal(await raw('/', { host: `evil.example:${port}` }), 400);
  assert.equal(await raw('/', { host: `127.0.0.1:${port + 1}` }), 400);
  assert.equal(await raw('/', { host: `localhost:${port}` }), 200);
  await alive();
});

test('cross-site requests (a page elsewhere using no-cors fetch) are refused; same-origin and typed URLs pass', async () => {
  assert.equal(await raw('/%', { 'sec-fetch-site': 'cross-site', 'sec-fetch-mode': 'no-cors', origin: 'http://evil.example' }), 403);
  assert.equal(await raw('/', { 'sec-fetch-site': 'cross-site', 'sec-fetch-mode': 'no-cors' }), 403);
  assert.equal(await raw('/', { 'sec-fetch-site': 'same-site' }), 403, 'another port on this machine is same-site, not same-origin');
  assert.equal(await raw('/', { 'sec-fetch-site': 'none' }), 200);
  assert.equal(await raw('/', { 'sec-fetch-site': 'same-origin' }), 200);
  await alive();
});

function open(host = `127.0.0.1:${port}`): Promise<WebSocket> {
  return new Promise((ok, fail) => {
    const ws = new WebSocket(`ws://127.0.0.1:${port}/engine?token=${token}`, { headers: { origin: `http://${host}`, host }, maxPayload: 64 * 1024 * 1024 });
    ws.once('open', () => ok(ws));
    ws.once('unexpected-response', (_q, res) => fail(new Error(`HTTP ${res.statusCode}`)));
    ws.once('error', fail);
  });
}

test('an oversized frame closes only that client (1009); other clients and the engine carry on', async () => {
  const bystander = await open(`localhost:${port}`);
  const inbox: any[] = [];
  bystander.on('message', (d: Buffer) => inbox.push(decodeFrame(new Uint8Array(d))));
  const attacker = await open();
  const closed = new Promise<number>((ok) => attacker.on('close', (code) => ok(code)));
  attacker.on('error', () => {});
  attacker.send(new Uint8Array(17 * 1024 * 1024)); // 17 MiB > the 16 MiB cap
  assert.equal(await closed, 1009);
  bystander.send(encodeFrame(request(7, 'engine.hello', {})));
  const end = Date.now() + 30_000;
  while (!inbox.some((m) => m.id === 7) && Date.now() < end) await new Promise((r) => setTimeout(r, 20));
  assert.equal(inbox.find((m) => m.id === 7)?.ok, true, 'the other client is still served by the engine');
  bystander.close();
  await alive();
});

test('fuzz: no request path stops the shell, every request gets a status line', async () => {
  const pathChars = fc.constantFrom(...'/%[]@:?#.\\~!$&\'()*+,;=-_abcXYZ019 \u00e9\u0000'.split(''));
  await fc.assert(
    fc.asyncProperty(fc.array(pathChars, { maxLength: 24 }).map((cs) => '/' + cs.join('').replace(/[ \r\n]/g, '%20')), async (p) => {
      const status = await raw(p);
      // 0 only when Node's HTTP parser itself rejects the request line and closes (also no crash).
      return status === 0 || (status >= 200 && status < 600);
    }),
    { numRuns: 150, seed: 10 },
  );
  await alive();
});
