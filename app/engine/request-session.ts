// Which window a request came from. The web shell serves any number of tabs from one engine, so
// the project lock (app/engine/project.ts) alone cannot keep a read-only tab from writing through
// the instance its holder opened. The shell stamps each forwarded request with the session its
// tab declared (in project.open or project.lock); the host runs the handler inside that session,
// and the project refuses writes from any session but its lock holder's. Requests that carry no
// session (the desktop app's one window per engine, the CLI, tests of the host) are judged by the
// project instance alone.
import { AsyncLocalStorage } from 'node:async_hooks';

const store = new AsyncLocalStorage<string | undefined>();

/** Runs `fn` (and everything it awaits) as a request of `session`. */
export function inSession<T>(session: string | undefined, fn: () => T): T {
  return store.run(session, fn);
}

/** The session of the request being handled, if it carries one. */
export function requestSession(): string | undefined {
  return store.getStore();
}
