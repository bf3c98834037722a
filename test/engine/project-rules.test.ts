// Projects where they belong and sign-off as the project records it, checked on disk:
//  - a new project only in a folder that does not exist or is empty, never in a system folder
//    (the Filesystem Hierarchy Standard 3.0 names /etc, /usr, /var … as the system's own), with
//    nothing written when refused;
//  - a lock naming its holder; a second session opens read-only and cannot write; a lock whose
//    process has exited (a real child process, asked of the operating system) is stale;
//  - approvals the audits do not support are refused without a reason and recorded with one.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { hostname, tmpdir, userInfo } from 'node:os';
import { join } from 'node:path';
import { LOCK_FILE, Project, acquireLock, lockIsStale, newProjectFolderProblem, releaseLock, vectorHash } from '../../app/engine/project.ts';

const gen = { name: 'demo', fingerprint: 'f'.repeat(64) };
const temp = () => mkdtempSync(join(tmpdir(), 'plumbline-rules-'));

test('system folders and non-empty folders are refused with nothing written', () => {
  const before = readdirSync('/etc').sort();
  assert.match(newProjectFolderProblem('/etc') ?? '', /\/etc is a system folder/);
  assert.match(newProjectFolderProblem('/etc/plumbline-new') ?? '', /inside the system folder \/etc/);
  assert.match(newProjectFolderProblem('/usr/local/share/x') ?? '', /inside the system folder \/usr/);
  assert.match(newProjectFolderProblem('/') ?? '', /system folder/);
  assert.throws(() => Project.open('/etc', true, gen), /cannot create a project here: \/etc is a system folder/);
  assert.throws(() => Project.open('/etc/plumbline-new', true, gen), /inside the system folder/);
  assert.deepEqual(readdirSync('/etc').sort(), before);
  assert.equal(existsSync('/etc/plumbline-new'), false);

  const full = temp();
  writeFileSync(join(full, 'notes.txt'), 'keep me');
  assert.throws(() => Project.open(full, true, gen), /is not empty \(it holds notes\.txt\)/);
  assert.deepEqual(readdirSync(full), ['notes.txt']);

  const file = join(temp(), 'a-file');
  writeFileSync(file, 'x');
  assert.match(newProjectFolderProblem(file) ?? '', /is a file/);

  // A new folder and an empty one are fine.
  const empty = temp();
  assert.equal(newProjectFolderProblem(empty), null);
  Project.open(empty, true, gen);
  assert.deepEqual(readdirSync(empty).sort(), ['audits', 'directions', 'project.json', 'renders']);
  assert.equal(newProjectFolderProblem(join(temp(), 'new', 'deeper')), null);
  // Reopening an existing project is not creating one.
  assert.doesNotThrow(() => Project.open(empty, true, gen));
});

test('a second session opens read-only, names the holder, and cannot write', () => {
  const dir = join(temp(), 'p');
  const a = Project.open(dir, true, gen);
  assert.equal(a.lock('session-aaaa').readOnly, false);
  const lock = JSON.parse(readFileSync(join(dir, LOCK_FILE), 'utf8'));
  assert.equal(lock.pid, process.pid);
  assert.equal(lock.host, hostname());
  assert.equal(lock.session, 'session-aaaa');
  // The lock names a person, not only a process (the tryout: "process 22575 on vm").
  assert.equal(lock.user, userInfo().username);
  const b = Project.open(dir, false, gen);
  const r = b.lock('session-bbbb');
  assert.equal(r.readOnly, true);
  assert.equal(r.holder.session, 'session-aaaa');
  const saved = readFileSync(join(dir, 'project.json'), 'utf8');
  assert.throws(() => b.saveUi({ seed: 1, psi: 0.7, strengths: {}, pinned: [], tags: {} }), /opened read-only — another window \([^,]+, process \d+ on .*\) has this project open/);
  assert.throws(() => b.appendReview({ at: 'x', direction: 'd', vectorHash: 'h', status: 'in-review', reviewer: 'r', note: '' }), /read-only/);
  assert.equal(readFileSync(join(dir, 'project.json'), 'utf8'), saved);
  assert.equal(existsSync(join(dir, 'review-log.jsonl')), false);
  // The holder renews; after it releases, the other session takes the lock.
  assert.equal(a.lock('session-aaaa').readOnly, false);
  releaseLock(dir, 'session-bbbb'); // not the holder: nothing happens
  assert.equal(existsSync(join(dir, LOCK_FILE)), true);
  releaseLock(dir, 'session-aaaa');
  assert.equal(b.lock('session-bbbb').readOnly, false);
});

test('a lock whose process has exited, or that was not renewed, is stale and taken over', () => {
  const dir = join(temp(), 'p');
  mkdirSync(dir);
  // A real process that has ended: the operating system no longer knows its pid.
  const child = spawnSync(process.execPath, ['-e', 'process.stdout.write(String(process.pid))'], { encoding: 'utf8' });
  const deadPid = Number(child.stdout);
  const now = new Date().toISOString();
  assert.equal(lockIsStale({ pid: deadPid, host: hostname(), session: 'gone-session', at: now }), true);
  assert.equal(lockIsStale({ pid: process.pid, host: hostname(), session: 'live-session', at: now }), false);
  assert.equal(lockIsStale({ pid: process.pid, host: hostname(), session: 'old-session', at: new Date(Date.now() - 10 * 60_000).toISOString() }), true);
  // Another machine's live-looking lock holds while it is renewed.
  assert.equal(lockIsStale({ pid: 1, host: 'elsewhere.example', session: 'remote-session', at: now }), false);
  writeFileSync(join(dir, LOCK_FILE), JSON.stringify({ pid: deadPid, host: hostname(), session: 'gone-session', at: now }));
  const r = acquireLock(dir, 'fresh-session');
  assert.equal(r.readOnly, false);
  assert.equal(JSON.parse(readFileSync(join(dir, LOCK_FILE), 'utf8')).session, 'fresh-session');
});

test('sign-off in the project: unaudited and failed approvals need a reason, which the log records; no-ops refused', () => {
  const dir = join(temp(), 'p');
  const p = Project.open(dir, true, gen);
  const vector = new Float32Array([1, 0, 0, 0]);
  p.saveDirection({ name: 'crest', target: null, layers: null, vector, notes: '', source: {} }, 'w');
  const hash = vectorHash(vector, null);
  assert.equal(p.signOff('crest', hash).gate?.state, 'unaudited');
  assert.throws(() => p.review('crest', hash, { status: 'approved', reviewer: 'Ines', note: '' }), /never audited/);
  assert.throws(() => p.review('crest', hash, { status: 'draft', reviewer: 'Ines', note: '' }), /already draft/);
  assert.equal(existsSync(join(dir, 'review-log.jsonl')), false);
  const s = p.review('crest', hash, { status: 'approved', reviewer: 'Ines', note: '', override: 'shipping the demo build today' });
  assert.equal(s.status, 'approved');
  const line = JSON.parse(readFileSync(join(dir, 'review-log.jsonl'), 'utf8').trim());
  assert.equal(line.override, 'shipping the demo build today');
  assert.equal(line.gate, 'never audited');

  // A failed audit of the current vector: the gate says so; a passing one of an older vector does not count.
  const report = (verdict: string, h: string, probes = 64) => ({ createdAt: new Date().toISOString(), probes: { count: probes }, directions: [{ name: 'crest', verdict, reason: verdict === 'fail' ? 'leaks into backdrop' : 'clean', safeRange: [-2, 2], vectorHash: h }] });
  p.saveAudit(report('pass', 'old-hash'), { crest: 'old-hash' });
  assert.equal(p.signOff('crest', hash).gate?.state, 'stale');
  p.saveAudit(report('fail', hash), { crest: hash });
  const failed = p.signOff('crest', hash);
  assert.equal(failed.gate?.state, 'failed');
  assert.deepEqual(failed.transitions?.find((t) => t.to === 'approved')?.allowed, 'no'); // already approved
  p.review('crest', hash, { status: 'in-review', reviewer: 'Ines', note: '' });
  assert.equal(p.signOff('crest', hash).transitions?.find((t) => t.to === 'approved')?.allowed, 'override');
  assert.throws(() => p.review('crest', hash, { status: 'approved', reviewer: 'Ines', note: '' }), /its last audit failed: leaks into backdrop/);
  // Audits are history: two files, neither replaced.
  assert.equal(readdirSync(join(dir, 'audits')).length, 2);
  assert.equal(p.signOff('crest', hash).audits?.length, 2);
});

test('rename before any history moves the files; delete keeps them under directions/deleted/', () => {
  const dir = join(temp(), 'p');
  const p = Project.open(dir, true, gen);
  const v = new Float32Array([0, 1, 0, 0]);
  p.saveDirection({ name: 'tilt', target: null, layers: null, vector: v, notes: '', source: {} }, 'w');
  p.renameDirection('tilt', 'lean');
  assert.deepEqual(readdirSync(join(dir, 'directions')).sort(), ['lean.json', 'lean.npy']);
  assert.equal(JSON.parse(readFileSync(join(dir, 'directions', 'lean.json'), 'utf8')).directions[0].name, 'lean');
  assert.equal(Project.open(dir, false, gen).loadDirections({ space: 'w', size: 4, layers: 1 } as never)[0].name, 'lean');
  // With history under its name, it keeps the name.
  p.review('lean', vectorHash(v, null), { status: 'in-review', reviewer: 'Ines', note: '' });
  assert.throws(() => p.renameDirection('lean', 'other'), /keeps that name so the history stays attached/);
  p.deleteDirection('lean');
  assert.deepEqual(p.doc.directions, []);
  const kept = readdirSync(join(dir, 'directions', 'deleted'));
  assert.equal(kept.length, 2);
  assert.ok(kept.every((f) => /lean\.(npy|json)$/.test(f)));
  assert.ok(existsSync(join(dir, 'review-log.jsonl')));
});

test('discovery candidates are kept in candidates/ with their strips until removed', () => {
  const dir = join(temp(), 'p');
  const p = Project.open(dir, true, gen);
  const vector = new Float32Array([0.6, 0.8, 0, 0]);
  // A 2×2 strip image with known pixels: the bytes must come back exactly (PNG is lossless).
  const rgba = new Uint8Array([255, 0, 0, 255, 0, 255, 0, 255, 0, 0, 255, 255, 10, 20, 30, 255]);
  p.saveCandidate('20260101-1', { name: 'sefa_0', target: null, layers: null, vector, notes: 'n', source: { method: 'sefa' } }, 'w', { seeds: [0, 1], strengths: [-1, 1], images: [{ width: 2, height: 2, rgba }] });
  const back = Project.open(dir, false, gen).loadCandidates({ space: 'w', size: 4, layers: 1 } as never);
  assert.equal(back.length, 1);
  assert.equal(back[0].direction.name, 'sefa_0');
  assert.deepEqual(Array.from(back[0].direction.vector), Array.from(vector));
  assert.deepEqual(back[0].strip.seeds, [0, 1]);
  assert.deepEqual(Array.from(back[0].strip.images[0].rgba), Array.from(rgba));
  p.removeCandidate('20260101-1');
  assert.deepEqual(readdirSync(join(dir, 'candidates')), []);
});
