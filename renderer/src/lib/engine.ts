// The renderer's side of the protocol: one client over either transport (Electron MessagePort or
// the web shell's WebSocket). Every incoming message is validated; results are checked per method.
import { decodeFrame, encodeFrame } from '../../../app/protocol/frames.ts';
import {
  parseMessage, parseResult, request, type EventData, type EventName, type Message, type Method, type Params, type Result, type WireError, type ErrorCode,
} from '../../../app/protocol/messages.ts';

export class EngineRequestError extends Error {
  constructor(readonly error: WireError) {
    super(error.message);
  }
  get code(): ErrorCode {
    return this.error.code;
  }
}

interface Transport {
  send(m: Message): void;
  close(): void;
}

interface Pending {
  resolve(v: unknown): void;
  reject(e: unknown): void;
  method: Method;
  onProgress?: (done: number, total: number, label: string, workers?: EventData<'job.progress'>['workers']) => void;
}

type Listener = (data: never) => void;

export class EngineClient {
  #transport: Transport | null = null;
  #nextId = 1;
  #pending = new Map<number, Pending>();
  #listeners = new Map<string, Set<Listener>>();

  /** Connects over the web shell's WebSocket (token from the page URL). */
  connectWebSocket(url: string): void {
    const ws = new WebSocket(url);
    ws.binaryType = 'arraybuffer';
    const queue: Message[] = [];
    ws.onopen = () => queue.splice(0).forEach((m) => ws.send(encodeFrame(m) as Uint8Array<ArrayBuffer>));
    ws.onmessage = (e) => {
      try {
        this.#receive(decodeFrame(new Uint8Array(e.data as ArrayBuffer)));
      } catch (err) {
        console.error('bad frame from web shell', err);
      }
    };
    ws.onclose = () => {
      this.#failAll('the connection to the web shell closed');
      this.#emit('engine.stopped', { reason: 'connection to the web shell closed', code: null, restarting: false });
    };
    this.#transport = {
      send: (m) => (ws.readyState === WebSocket.OPEN ? ws.send(encodeFrame(m) as Uint8Array<ArrayBuffer>) : queue.push(m)),
      close: () => ws.close(),
    };
  }

  /** Connects over a MessagePort handed over by the Electron preload. */
  connectPort(port: MessagePort): void {
    port.onmessage = (e) => this.#receive(e.data);
    port.start();
    this.#transport = { send: (m) => port.postMessage(m), close: () => port.close() };
  }

  request<M extends Method>(method: M, params: Params<M>, onProgress?: Pending['onProgress']): Promise<Result<M>> {
    if (!this.#transport) return Promise.reject(new EngineRequestError({ code: 'engine-stopped', message: 'not connected to the engine' }));
    const id = this.#nextId++;
    return new Promise((resolve, reject) => {
      this.#pending.set(id, { resolve: resolve as (v: unknown) => void, reject, method, onProgress });
      this.#transport!.send(request(id, method, params));
    });
  }

  /** Request id of the most recent request: job.cancel names a job by it. */
  get lastRequestId(): number {
    return this.#nextId - 1;
  }

  on<E extends EventName>(name: E, listener: (data: EventData<E>) => void): () => void {
    let set = this.#listeners.get(name);
    if (!set) this.#listeners.set(name, (set = new Set()));
    set.add(listener as Listener);
    return () => set!.delete(listener as Listener);
  }

  #emit<E extends EventName>(name: E, data: EventData<E>): void {
    for (const l of this.#listeners.get(name) ?? []) (l as (d: EventData<E>) => void)(data);
  }

  #failAll(message: string): void {
    for (const [, p] of this.#pending) p.reject(new EngineRequestError({ code: 'engine-stopped', message }));
    this.#pending.clear();
  }

  #receive(raw: unknown): void {
    let m: Message;
    try {
      m = parseMessage(raw);
    } catch (err) {
      console.error('engine sent an invalid message', err);
      return;
    }
    if (m.type === 'event') {
      if (m.event === 'job.progress') {
        const d = m.data as EventData<'job.progress'>;
        this.#pending.get(d.requestId)?.onProgress?.(d.done, d.total, d.label, d.workers);
      }
      if (m.event === 'engine.stopped') this.#failAll('the engine stopped');
      this.#emit(m.event, m.data as never);
      return;
    }
    if (m.type !== 'response') return;
    const p = this.#pending.get(m.id);
    if (!p) {
      if (!m.ok) console.error('engine error without a request', m.error);
      return;
    }
    this.#pending.delete(m.id);
    if (!m.ok) p.reject(new EngineRequestError(m.error));
    else {
      try {
        p.resolve(parseResult(p.method, m.result));
      } catch (err) {
        p.reject(err);
      }
    }
  }
}
