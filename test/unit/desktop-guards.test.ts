// Desktop hardening (issue 10) against a mocked electron object, as ipc-guard.test.ts does:
// navigation judged by scheme and host (Node reports the origin of app://plumbline as "null",
// so an origin comparison would let every "null" origin through), redirects and sub-frame
// navigations denied, new windows denied, device permissions denied, DevTools off when packaged,
// and the grantFileProtocolExtraPrivileges fuse off in the packaging config.
// Outside references: WHATWG URL Standard §4.4 (origin of a non-special scheme is an opaque
// origin, serialized "null"), Electron security checklist items 13–15 and 19 (fuses), the
// electron-builder `electronFuses` option names.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { devToolsAllowed, hardenContents, hardenSession, isAppUrl } from '../../app/main/guards.ts';

const root = join(import.meta.dirname, '..', '..');

/** A stand-in for WebContents: records listeners and the window-open handler. */
function mockContents() {
  const listeners = new Map<string, ((...a: unknown[]) => void)[]>();
  let openHandler: ((d: unknown) => { action: string }) | null = null;
  const contents = {
    on(event: string, fn: (...a: unknown[]) => void) {
      listeners.set(event, [...(listeners.get(event) ?? []), fn]);
      return contents;
    },
    setWindowOpenHandler(fn: (d: unknown) => { action: string }) {
      openHandler = fn;
    },
  };
  const fire = (event: string, details: Record<string, unknown>, ...args: unknown[]) => {
    let prevented = false;
    const e = { ...details, preventDefault: () => (prevented = true) };
    for (const fn of listeners.get(event) ?? []) fn(e, ...args);
    return prevented;
  };
  return { contents, fire, open: (url: string) => openHandler!({ url }), has: (e: string) => listeners.has(e) };
}

test('the premise: Node serializes the origin of app://plumbline as "null", like any opaque origin', () => {
  assert.equal(new URL('app://plumbline/index.html').origin, 'null');
  assert.equal(new URL('evil://anything/').origin, 'null', 'so comparing origins cannot tell our page from any other custom scheme');
});

test('only app://plumbline pages pass the navigation check', () => {
  assert.equal(isAppUrl('app://plumbline/index.html'), true);
  assert.equal(isAppUrl('app://plumbline/'), true);
  for (const bad of ['evil://plumbline/', 'app://plumbline.evil/', 'app://evil/', 'https://plumbline/', 'file:///etc/passwd', 'app://user:pw@plumbline/', 'javascript:alert(1)', 'data:text/html,x', 'not a url', '']) {
    assert.equal(isAppUrl(bad), false, bad);
  }
});

test('will-navigate, will-redirect, will-frame-navigate, webviews and new windows are guarded', () => {
  const m = mockContents();
  hardenContents(m.contents as never);
  for (const e of ['will-navigate', 'will-redirect', 'will-frame-navigate', 'will-attach-webview']) assert.ok(m.has(e), `${e} has a guard`);
  assert.equal(m.fire('will-navigate', { url: 'app://plumbline/index.html' }, 'app://plumbline/index.html'), false, 'our own page may load');
  assert.equal(m.fire('will-navigate', { url: 'evil://x/' }, 'evil://x/'), true, 'another custom scheme (also origin "null") is refused');
  assert.equal(m.fire('will-navigate', { url: 'https://evil.example/' }, 'https://evil.example/'), true);
  assert.equal(m.fire('will-redirect', { url: 'app://plumbline/index.html', isMainFrame: true }), true, 'redirects are refused outright');
  assert.equal(m.fire('will-frame-navigate', { url: 'app://plumbline/index.html', isMainFrame: true }), false);
  assert.equal(m.fire('will-frame-navigate', { url: 'app://plumbline/index.html', isMainFrame: false }), true, 'sub-frames never navigate');
  assert.equal(m.fire('will-frame-navigate', { url: 'https://evil.example/', isMainFrame: true }), true);
  assert.equal(m.fire('will-attach-webview', {}), true);
  assert.deepEqual(m.open('https://evil.example/'), { action: 'deny' });
  assert.deepEqual(m.open('app://plumbline/index.html'), { action: 'deny' });
});

test('permission requests, permission checks and device permissions are all denied', () => {
  const got: Record<string, unknown> = {};
  hardenSession({
    setPermissionRequestHandler: (fn: any) => fn(null, 'media', (v: boolean) => (got.request = v)),
    setPermissionCheckHandler: (fn: any) => (got.check = fn(null, 'hid', 'app://plumbline', {})),
    setDevicePermissionHandler: (fn: any) => (got.device = fn({ deviceType: 'usb', origin: 'app://plumbline', device: {} })),
  } as never);
  assert.deepEqual(got, { request: false, check: false, device: false });
});

test('DevTools only in development builds', () => {
  assert.equal(devToolsAllowed(true), false);
  assert.equal(devToolsAllowed(false), true);
  const main = readFileSync(join(root, 'app', 'main', 'index.ts'), 'utf8');
  assert.match(main, /devTools: devToolsAllowed\(app\.isPackaged\)/, 'the window uses it');
  assert.match(main, /hardenSession\(session\.defaultSession\)/);
  assert.match(main, /web-contents-created', \(_e, contents\) => hardenContents\(contents\)/, 'every web contents is hardened');
});

test('packaging turns the grantFileProtocolExtraPrivileges fuse off (electron-builder electronFuses)', () => {
  const yml = readFileSync(join(root, 'build', 'electron-builder.yml'), 'utf8');
  const fuses = /^electronFuses:\n((?:[ \t]+.*\n)+)/m.exec(yml)?.[1] ?? '';
  const value = (key: string) => new RegExp(`^\\s+${key}:\\s*(true|false)\\s*$`, 'm').exec(fuses)?.[1];
  assert.equal(value('grantFileProtocolExtraPrivileges'), 'false');
  assert.equal(value('runAsNode'), 'false');
  assert.equal(value('enableNodeCliInspectArguments'), 'false');
});
