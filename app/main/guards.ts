// Window and session hardening for the desktop shell (Electron security checklist: limit
// navigation, deny new windows, handle permission requests, disable or limit webviews), kept
// apart from index.ts so it can be tested against a mocked electron object.
//
// Navigation is judged by scheme and host, not by `URL.origin`: Node reports the origin of a
// custom scheme such as app://plumbline as the string "null", and "null" must never match.
import type { Session, WebContents } from 'electron';

export const APP_SCHEME = 'app:';
export const APP_HOST = 'plumbline';

/** True only for a page of our own renderer: app://plumbline/… */
export function isAppUrl(target: string): boolean {
  let u: URL;
  try {
    u = new URL(target);
  } catch {
    return false;
  }
  return u.protocol === APP_SCHEME && u.host === APP_HOST && u.username === '' && u.password === '';
}

type Preventable = { preventDefault(): void };
type NavigationDetails = { url?: string; isMainFrame?: boolean };
/** What hardenContents uses of WebContents: events and the window-open handler. */
export type GuardedContents = Pick<WebContents, 'on' | 'setWindowOpenHandler'>;

/**
 * The window may load only our own pages in its main frame. Redirects are refused outright (our
 * protocol handler never redirects), sub-frames may not navigate anywhere (the renderer has
 * none), new windows and webviews are denied.
 */
export function hardenContents(contents: GuardedContents): void {
  const on = contents.on.bind(contents) as (event: string, listener: (...args: unknown[]) => void) => unknown;
  on('will-navigate', (e: unknown, url: unknown) => {
    const target = typeof url === 'string' ? url : (e as NavigationDetails).url ?? '';
    if (!isAppUrl(target)) (e as Preventable).preventDefault();
  });
  on('will-redirect', (e: unknown) => (e as Preventable).preventDefault());
  on('will-frame-navigate', (e: unknown) => {
    const d = e as Preventable & NavigationDetails;
    if (!d.isMainFrame || !isAppUrl(d.url ?? '')) d.preventDefault();
  });
  on('will-attach-webview', (e: unknown) => (e as Preventable).preventDefault());
  contents.setWindowOpenHandler(() => ({ action: 'deny' }));
}

/** What hardenSession uses of Session. */
export type GuardedSession = Pick<Session, 'setPermissionRequestHandler' | 'setPermissionCheckHandler' | 'setDevicePermissionHandler'>;

/** Plumbline needs no camera, microphone, USB, HID, serial, notifications or any other permission. */
export function hardenSession(s: GuardedSession): void {
  s.setPermissionRequestHandler((_wc, _permission, callback) => callback(false));
  s.setPermissionCheckHandler(() => false);
  s.setDevicePermissionHandler(() => false);
}

/** DevTools only in development builds: a packaged app gives a local attacker no console into the renderer. */
export const devToolsAllowed = (isPackaged: boolean): boolean => !isPackaged;
