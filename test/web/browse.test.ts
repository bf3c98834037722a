// The web shell's folder browser: lists only inside the user's home and the chosen roots, follows
// symbolic links to where they really lead (the operating system's realpath) and refuses what
// lies outside; over HTTP it needs the shell's token, and a malformed engine request is answered
// under its own id so the page never waits for an answer that cannot come.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { get } from 'node:http';
import { mkdirSync, mkdtempSync, realpathSync, symlinkSync, writeFileSync } from 'node:fs';
import { homedir, tmpdir } from 'node:os';
import { join } from 'node:path';
import WebSocket from 'ws';
import { browseRoots, listFolder } from '../../app/web/browse.ts';
import { startWebShell, type WebShell } from '../../app/web/serve.ts';
import { decodeFrame, encodeFrame } from '../../app/protocol/frames.ts';

const root = realpathSync(mkdtempSync(join(tmpdir(), 'plumbline-browse-')));
mkdirSync(join(root, 'projects', 'crests'), { recursive: true });
writeFileSync(join(root, 'projects', 'sigil.card.json'), '{}');
writeFileSync(join(root, 'projects', '.hidden'), '');
symlinkSync('/etc', join(root, 'projects', 'escape'));

test('lists folders first, hides dot files, and stays inside the roots', () => {
  const roots = browseRoots({ PLUMBLINE_BROWSE_ROOTS: root });
  assert.deepEqual(roots, [realpathSync(homedir()), root]);
  const l = listFolder(join(root, 'projects'), roots);
  assert.deepEqual(l.entries, [{ name: 'crests', folder: true }, { name: 'escape', folder: true }, { name: 'sigil.card.json', folder: false }]);
  assert.equal(l.parent, root);
  assert.equal(listFolder(root, roots).parent, null);
  assert.throws(() => listFolder('/etc', roots), /outside the folders this web shell may show/);
  // A link inside a root that leads out of it is refused where it really leads.
  assert.throws(() => listFolder(join(root, 'projects', 'escape'), roots), /outside the folders/);
  assert.throws(() => listFolder(join(root, 'projects', 'sigil.card.json'), roots), /is not a folder/);
  assert.throws(() => listFolder(join(root, 'nope'), roots), /no such folder/);
});

let shell: WebShell;
before(async () => {
  process.env.PLUMBLINE_BROWSE_ROOTS = root;
  shell = await startWebShell({ quiet: true, threads: 1 });
});
after(async () => shell.close());

const fetchJson = (path: string) => new Promise<{ status: number; body: unknown }>((ok, fail) => {
  get(`${new URL(shell.url).origin}${path}`, (res) => {
    let body = '';
    res.on('data', (c) => (body += c));
    res.on('end', () => ok({ status: res.statusCode ?? 0, body: body ? JSON.parse(body) : null }));
  }).on('error', fail);
});

test('over HTTP: the token is required; outside paths are refused with a reason', async () => {
  assert.equal((await fetchJson(`/__browse?path=${encodeURIComponent(root)}`)).status, 403);
  assert.equal((await fetchJson(`/__browse?token=wrong&path=${encodeURIComponent(root)}`)).status, 403);
  const ok = await fetchJson(`/__browse?token=${shell.token}&path=${encodeURIComponent(join(root, 'projects'))}`);
  assert.equal(ok.status, 200);
  assert.equal((ok.body as { path: string }).path, join(root, 'projects'));
  const out = await fetchJson(`/__browse?token=${shell.token}&path=%2Fetc`);
  assert.equal(out.status, 400);
  assert.match((out.body as { error: string }).error, /outside the folders/);
});

test('a request with bad parameters is answered under its own id (so nothing waits forever)', async () => {
  const origin = new URL(shell.url).origin;
  const ws = new WebSocket(`ws://${new URL(shell.url).host}/engine?token=${shell.token}`, { headers: { origin } });
  await new Promise((r) => ws.once('open', r));
  const answer = new Promise<{ id: number; ok: boolean; error?: { code: string; message: string } }>((ok) => ws.on('message', (d) => {
    const m = decodeFrame(new Uint8Array(d as Buffer)) as { type: string; id: number; ok: boolean };
    if (m.type === 'response') ok(m);
  }));
  ws.send(encodeFrame({ v: 1, type: 'request', id: 41, method: 'audit.run', params: { directions: ['turn'], probes: -5 } } as never));
  const r = await answer;
  ws.close();
  assert.equal(r.id, 41);
  assert.equal(r.ok, false);
  assert.match(r.error!.message, /probes/);
});
