// Engine host entry for a Node child process (web shell), talking over the IPC channel with
// the V8 ("advanced") serialization so binary buffers cross without base64.
import { EngineHost } from './host.ts';
import { ENGINE_NAME } from '../protocol/version.ts';
import { event, type Message } from '../protocol/messages.ts';

if (!process.send) {
  console.error('child-entry must be started with an IPC channel (child_process.fork)');
  process.exit(2);
}
const threads = Number(process.env.PLUMBLINE_THREADS) || undefined;
const host = new EngineHost({ threads });
const port = { post: (m: Message) => process.send!(m) };
process.on('message', (m) => host.receive(m, port));
process.on('disconnect', () => process.exit(0));
port.post(event('engine.ready', { engine: ENGINE_NAME, restarted: false }));
