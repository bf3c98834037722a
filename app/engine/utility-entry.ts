// Engine host entry for Electron's utilityProcess. Main sends one MessagePortMain per renderer
// window; the host answers on that port directly, so images never pass through main.
import { EngineHost } from './host.ts';
import { ENGINE_NAME } from '../protocol/version.ts';
import { event, type Message } from '../protocol/messages.ts';

const threads = Number(process.env.PLUMBLINE_THREADS) || undefined;
const host = new EngineHost({ threads });

process.parentPort.on('message', (e) => {
  if (e.data?.type !== 'attach-port') return;
  for (const p of e.ports) {
    const port = { post: (m: Message) => p.postMessage(m) };
    p.on('message', (ev) => host.receive(ev.data, port));
    p.start();
    port.post(event('engine.ready', { engine: ENGINE_NAME, restarted: Boolean(e.data.restarted) }));
  }
});
