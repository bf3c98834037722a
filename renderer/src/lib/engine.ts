// The renderer's side of the protocol: one client over either transport (Electron MessagePort or
// the web shell's WebSocket). Every incoming message is validated; results are checked per method.
import { decodeFrame, encodeFrame } from '../../../app/protocol/frames.ts';
import {
  parseMessage, parseResult, request, requestSchemas, type EventData, type EventName, type Message, type Method, type Params, type Result, type WireError, type ErrorCode,
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
  /** A MessagePort dies with its engine; the web shell's socket outlives it. */
  diesWithEngine: boolean;
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
  #lastSent = -1;
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
      diesWithEngine: false,
    };
  }

  /** Connects over a MessagePort handed over by the Electron preload. */
  connectPort(port: MessagePort): void {
    port.onmessage = (e) => this.#receive(e.data);
    port.start();
    this.#transport = { send: (m) => port.postMessage(m), close: () => port.close(), diesWithEngine: true };
  }

  request<M extends Method>(method: M, params: Params<M>, onProgress?: Pending['onProgress']): Promise<Result<M>> {
    if (!this.#transport) return Promise.reject(new EngineRequestError({ code: 'engine-stopped', message: 'not connected to the engine' }));
    // Checked here too, so a request the engine would refuse fails at once with the same message.
    const checked = requestSchemas[method].safeParse(params);
    if (!checked.success) {
      this.#lastSent = -1;
      const why = checked.error.issues.slice(0, 3).map((i) => `${i.path.join('.') || 'request'}: ${i.message}`).join('; ');
      return Promise.reject(new EngineRequestError({ code: 'bad-request', message: `${method} refused: ${why}` }));
    }
    const id = this.#nextId++;
    this.#lastSent = id;
    return new Promise((resolve, reject) => {
      this.#pending.set(id, { resolve: resolve as (v: unknown) => void, reject, method, onProgress });
      this.#transport!.send(request(id, method, params));
    });
  }

  /**
   * Ends the wait for a job at once: asks the engine to cancel it and settles the caller's promise
   * as cancelled, whatever the engine answers later (or if it never does).
   */
  cancel(requestId: number): void {
    const p = this.#pending.get(requestId);
    if (this.#transport) this.#transport.send(request(this.#nextId++, 'job.cancel', { requestId }));
    if (!p) return;
    this.#pending.delete(requestId);
    p.resolve({ cancelled: true });
  }

  /** Request id of the most recent request: job.cancel names a job by it. */
  get lastRequestId(): number {
    return this.#lastSent;
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

  /** A protocol message from outside the transport (Electron main's engine.stopped), validated like any other. */
  deliver(raw: unknown): void {
    this.#receive(raw);
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
      if (m.event === 'engine.stopped') {
        this.#failAll('the engine stopped');
        // Until the restarted engine's port arrives, requests fail at once instead of waiting forever.
        if (this.#transport?.diesWithEngine) this.#transport = null;
      }
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
