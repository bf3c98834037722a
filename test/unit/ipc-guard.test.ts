// Main-process IPC guard: a forged sender, a sub-frame and a malformed payload are refused
// before any handler runs (Electron security checklist item 17, "validate the sender").
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { guarded } from '../../app/main/ipc.ts';
import { desktopSchemas, DESKTOP_CHANNELS as C } from '../../app/protocol/desktop.ts';

const mainFrame = { url: 'app://plumbline/index.html' };
const isMain = (e: { senderFrame: unknown }) => e.senderFrame === mainFrame;
const event = (frame: unknown) => ({ senderFrame: frame }) as never;

test('only our page in the main frame with a valid payload reaches the handler', async () => {
  let calls = 0;
  const h = guarded(desktopSchemas[C.recentAdd], () => ++calls, isMain);
  assert.equal(await h(event(mainFrame), { path: '/models/a.onnx' }), 1);
  await assert.rejects(h(event({ url: 'https://evil.example/' }), { path: '/x' }), /refused: IPC from a frame/);
  await assert.rejects(h(event({ url: 'app://plumbline/index.html' }), { path: '/x' }), /refused: IPC from a frame/, 'a sub-frame of our origin is refused');
  await assert.rejects(h(event({ url: 'file:///etc/passwd' }), { path: '/x' }), /refused/);
  await assert.rejects(h(event(null), { path: '/x' }), /refused/);
  await assert.rejects(h(event(mainFrame), { path: 42 }), /refused: invalid payload/);
  await assert.rejects(h(event(mainFrame), {}), /refused: invalid payload/);
  assert.equal(calls, 1);
});

test('setting values are checked against their key', async () => {
  const h = guarded(desktopSchemas[C.settingSet], (p) => p, isMain);
  assert.deepEqual(await h(event(mainFrame), { key: 'theme', value: 'dark' }), { key: 'theme', value: 'dark' });
  await assert.rejects(h(event(mainFrame), { key: 'theme', value: 'neon' }), /invalid payload/);
  await assert.rejects(h(event(mainFrame), { key: 'threads', value: 0 }), /invalid payload/);
});
