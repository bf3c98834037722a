// One request to an in-process engine host, answered as its result (or thrown as an Error with the
// engine's error code): the shared way engine tests drive the protocol without a shell.
import type { EngineHost } from '../../app/engine/host.ts';
import { request, type Method, type Params } from '../../app/protocol/messages.ts';

export async function callHost<M extends Method>(host: EngineHost, method: M, params: Params<M>): Promise<any> {
  const id = Math.floor(Math.random() * 1e9);
  let got: any;
  host.receive(request(id, method, params), { post: (m: any) => { if (m.type === 'response' && m.id === id) got = m; } });
  while (!got) await new Promise((r) => setTimeout(r, 5));
  if (!got.ok) throw Object.assign(new Error(got.error.message), { code: got.error.code });
  return got.result;
}
