// One request to an in-process engine host, answered as its result (or thrown as an Error with the
// engine's error code): the shared way engine tests drive the protocol without a shell.
import type { EngineHost } from '../../app/engine/host.ts';
import { parseResult, request, type Method, type Params, type Result } from '../../app/protocol/messages.ts';

export async function callHost<M extends Method>(host: EngineHost, method: M, params: Params<M>): Promise<any> {
  const id = Math.floor(Math.random() * 1e9);
  let got: any;
  host.receive(request(id, method, params), { post: (m: any) => { if (m.type === 'response' && m.id === id) got = m; } });
  while (!got) await new Promise((r) => setTimeout(r, 5));
  if (!got.ok) throw Object.assign(new Error(got.error.message), { code: got.error.code });
  return got.result;
}

/**
 * One request whose result is also checked against the protocol's result schema (as a client
 * would), with the job's events passed to `onEvent`; waits at most `timeoutMs`.
 */
export async function callHostChecked<M extends Method>(host: EngineHost, method: M, params: Params<M>, onEvent?: (e: any) => void, timeoutMs = 300_000): Promise<Result<M>> {
  const id = Math.floor(Math.random() * 1e9);
  let got: any;
  host.receive(request(id, method, params), { post: (m: any) => { if (m.type === 'event') onEvent?.(m); else if (m.type === 'response' && m.id === id) got = m; } });
  const end = Date.now() + timeoutMs;
  while (!got) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${method}`);
    await new Promise((r) => setTimeout(r, 10));
  }
  if (!got.ok) throw Object.assign(new Error(got.error.message), { code: got.error.code });
  return parseResult(method, got.result);
}
