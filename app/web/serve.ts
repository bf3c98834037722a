// The web shell: serves the built renderer on 127.0.0.1 only and bridges a WebSocket to an
// engine host in a child process. A random token, required on the socket and checked in
// constant time, keeps other local pages and users out; the socket also checks Origin.
// Nothing a client sends can stop the shell: malformed URLs, foreign Host headers (DNS
// rebinding), cross-site requests, oversized frames and socket errors are answered with an
// error status or by closing that one client; the shell and its engine keep running.
import { createServer, type IncomingMessage, type ServerResponse } from 'node:http';
import { fork, type ChildProcess } from 'node:child_process';
import { randomBytes, timingSafeEqual } from 'node:crypto';
import { existsSync, readFileSync, statSync } from 'node:fs';
import { dirname, extname, join, normalize, resolve, sep } from 'node:path';
import { fileURLToPath } from 'node:url';
import { WebSocketServer, type WebSocket } from 'ws';
import { decodeFrame, encodeFrame } from '../protocol/frames.ts';
import { ENGINE_NAME } from '../protocol/version.ts';
import { PROTOCOL_VERSION, event, parseMessage, type Message, type ResponseMessage } from '../protocol/messages.ts';
import { browseRoots, listFolder } from './browse.ts';

const here = dirname(fileURLToPath(import.meta.url));
const root = resolve(here, '..', '..');
const MIME: Record<string, string> = { '.html': 'text/html; charset=utf-8', '.js': 'text/javascript', '.css': 'text/css', '.svg': 'image/svg+xml', '.png': 'image/png', '.json': 'application/json', '.woff2': 'font/woff2' };
const RESTART_DELAYS = [200, 1000, 3000, 10000];
/** Largest engine frame a client may send: requests are small JSON; images only flow the other way. */
export const MAX_FRAME_BYTES = 16 * 1024 * 1024;
/** Host names a browser uses for this machine's loopback address; anything else is DNS rebinding or a proxy. */
const LOOPBACK_NAMES = ['127.0.0.1', 'localhost'];

/** The Host header if it names the loopback address on our port, else null. */
export function loopbackHost(host: string | undefined, port: number): string | null {
  if (!host) return null;
  const h = host.toLowerCase();
  return LOOPBACK_NAMES.some((n) => h === `${n}:${port}`) ? h : null;
}

/** The request path, or null when it cannot be parsed (never throws: '%' or '//[' are just bad requests). */
export function requestPath(raw: string | undefined): { pathname: string; searchParams: URLSearchParams; decoded: string } | null {
  if (!raw || !raw.startsWith('/')) return null;
  try {
    // Parse as a path on a fixed origin: '//x' is a path here, not a host.
    const url = new URL(`http://127.0.0.1${raw}`);
    return { pathname: url.pathname, searchParams: url.searchParams, decoded: decodeURIComponent(url.pathname) };
  } catch {
    return null;
  }
}

/** Fetch metadata (sent by every current browser): requests from other sites, other ports included, are refused. */
const crossSite = (req: IncomingMessage) => {
  const site = req.headers['sec-fetch-site'];
  return site === 'cross-site' || site === 'same-site';
};

export interface WebShellOptions {
  port?: number;
  rendererDir?: string;
  threads?: number;
  /** Enables POST /__test/kill-engine (end-to-end tests only). */
  testHooks?: boolean;
  quiet?: boolean;
}

export interface WebShell {
  url: string;
  token: string;
  close(): Promise<void>;
  killEngine(): void;
}

interface Client {
  ws: WebSocket;
  id: number;
  /**
   * The session this tab declared in project.open or project.lock. Every request the tab sends is
   * stamped with it (or with a name of this connection before it declares one), so the engine can
   * refuse project writes from a tab that does not hold the project's lock.
   */
  session?: string;
}

export async function startWebShell(options: WebShellOptions = {}): Promise<WebShell> {
  const rendererDir = resolve(options.rendererDir ?? join(root, 'out', 'renderer'));
  if (!existsSync(join(rendererDir, 'index.html'))) throw new Error(`${rendererDir}: no built renderer (run npm run build first)`);
  const token = randomBytes(24).toString('hex');
  const roots = browseRoots();
  const log = (s: string) => !options.quiet && process.stderr.write(`[web shell] ${s}\n`);

  // Engine child and request routing: client request ids are remapped to host-wide ids.
  let child: ChildProcess | null = null;
  let restarts = 0;
  let closing = false;
  let everStarted = false;
  let nextId = 1;
  const routes = new Map<number, { client: Client; id: number }>();
  const clients = new Set<Client>();
  let nextClient = 1;

  const send = (client: Client, m: Message) => {
    if (client.ws.readyState === client.ws.OPEN) client.ws.send(encodeFrame(m));
  };
  const broadcast = (m: Message) => clients.forEach((c) => send(c, m));

  const startEngine = () => {
    const restarted = everStarted;
    everStarted = true;
    const c = fork(join(root, 'app', 'engine', 'child-entry.ts'), [], {
      execArgv: ['--import', 'tsx'],
      serialization: 'advanced',
      env: { ...process.env, ...(options.threads ? { PLUMBLINE_THREADS: String(options.threads) } : {}) },
      stdio: ['ignore', 'inherit', 'inherit', 'ipc'],
    });
    child = c;
    c.on('message', (raw) => {
      const m = raw as Message;
      if (m?.type === 'response') {
        const route = routes.get(m.id);
        if (!route) return;
        routes.delete(m.id);
        send(route.client, { ...m, id: route.id });
      } else if (m?.type === 'event') {
        if (m.event === 'job.progress') {
          const data = m.data as { requestId: number };
          const route = routes.get(data.requestId);
          if (route) send(route.client, { ...m, data: { ...data, requestId: route.id } });
        } else if (m.event === 'engine.ready') {
          restarts = 0;
          broadcast(event('engine.ready', { engine: (m.data as { engine: string }).engine, restarted }));
        } else broadcast(m);
      }
    });
    c.on('exit', (code, signal) => {
      if (child === c) child = null;
      // Every request in flight fails with a typed error; clients then recover.
      for (const [hostId, route] of routes) {
        send(route.client, { v: PROTOCOL_VERSION, type: 'response', id: route.id, ok: false, error: { code: 'engine-stopped', message: `the engine stopped (${signal ?? `exit code ${code}`}) before answering` } });
        routes.delete(hostId);
      }
      if (closing) return;
      const delay = RESTART_DELAYS[Math.min(restarts, RESTART_DELAYS.length - 1)];
      restarts++;
      log(`engine stopped (${signal ?? code}); restarting in ${delay} ms`);
      broadcast(event('engine.stopped', { reason: signal ? `killed by ${signal}` : `exited with code ${code}`, code: code ?? null, restarting: true }));
      setTimeout(() => !closing && startEngine(), delay);
    });
  };
  startEngine();

  const csp = (host: string) =>
    [
      "default-src 'none'",
      "script-src 'self'",
      "style-src 'self' 'unsafe-inline'",
      "img-src 'self' data: blob:",
      "font-src 'self'",
      `connect-src 'self' ws://${host}`,
      "base-uri 'none'",
      "form-action 'none'",
      "frame-ancestors 'none'",
      "object-src 'none'",
    ].join('; ');

  const refuse = (res: ServerResponse, status: number, why: string) => {
    if (!res.headersSent) res.writeHead(status, { 'content-type': 'text/plain', 'cache-control': 'no-store' });
    res.end(why);
  };

  const server = createServer((req: IncomingMessage, res: ServerResponse) => {
    try {
      serve(req, res);
    } catch (err) {
      log(`request failed: ${(err as Error).message}`);
      refuse(res, 500, 'internal error');
    }
  });

  const serve = (req: IncomingMessage, res: ServerResponse) => {
    const port = (server.address() as { port: number }).port;
    const host = loopbackHost(req.headers.host, port);
    if (!host) return refuse(res, 400, 'bad Host header: open the URL the shell printed');
    if (crossSite(req)) return refuse(res, 403, 'cross-site requests are refused');
    const url = requestPath(req.url);
    if (!url) return refuse(res, 400, 'malformed URL');
    if (options.testHooks && req.method === 'POST' && url.pathname === '/__test/kill-engine' && tokenOk(url.searchParams.get('token'))) {
      child?.kill('SIGKILL');
      res.writeHead(204).end();
      return;
    }
    if (req.method === 'GET' && url.pathname === '/__browse') {
      // The folder browser: same token as the engine socket; home and chosen roots only.
      if (!tokenOk(url.searchParams.get('token'))) {
        res.writeHead(403).end();
        return;
      }
      try {
        const listing = listFolder(url.searchParams.get('path'), roots);
        res.writeHead(200, { 'content-type': 'application/json', 'cache-control': 'no-store', 'x-content-type-options': 'nosniff' }).end(JSON.stringify(listing));
      } catch (err) {
        res.writeHead(400, { 'content-type': 'application/json' }).end(JSON.stringify({ error: (err as Error).message }));
      }
      return;
    }
    if (req.method !== 'GET' && req.method !== 'HEAD') {
      res.writeHead(405).end();
      return;
    }
    const rel = url.pathname === '/' ? 'index.html' : url.decoded.replace(/^\/+/, '');
    if (rel.includes('\0')) return refuse(res, 400, 'malformed URL');
    const file = normalize(join(rendererDir, rel));
    if (!file.startsWith(rendererDir + sep) || !existsSync(file) || !statSync(file).isFile()) {
      res.writeHead(404, { 'content-type': 'text/plain' }).end('not found');
      return;
    }
    res.writeHead(200, {
      'content-type': MIME[extname(file)] ?? 'application/octet-stream',
      'content-security-policy': csp(host),
      'x-content-type-options': 'nosniff',
      'cache-control': 'no-store',
      'referrer-policy': 'no-referrer',
    });
    res.end(req.method === 'HEAD' ? undefined : readFileSync(file));
  };
  // Unparseable requests (bad headers, oversized headers): answer 400 on that connection only.
  server.on('clientError', (_err, socket) => {
    if (socket.writable) socket.end('HTTP/1.1 400 Bad Request\r\nconnection: close\r\n\r\n');
    else socket.destroy();
  });

  const tokenOk = (given: string | null) => {
    if (!given) return false;
    const a = Buffer.from(given);
    const b = Buffer.from(token);
    return a.length === b.length && timingSafeEqual(a, b);
  };

  const wss = new WebSocketServer({ noServer: true, maxPayload: MAX_FRAME_BYTES });
  wss.on('error', (err) => log(`socket server error: ${err.message}`));
  server.on('upgrade', (req, socket, head) => {
    socket.on('error', () => socket.destroy());
    const url = requestPath(req.url);
    const port = (server.address() as { port: number }).port;
    const host = loopbackHost(req.headers.host, port);
    // The page's own origin, under the loopback name the user opened it with.
    const originOk = !!host && req.headers.origin === `http://${host}`;
    if (!url || url.pathname !== '/engine' || !tokenOk(url.searchParams.get('token')) || !originOk) {
      if (socket.writable) socket.write('HTTP/1.1 403 Forbidden\r\n\r\n');
      socket.destroy();
      return;
    }
    wss.handleUpgrade(req, socket, head, (ws) => {
      const client: Client = { ws, id: nextClient++ };
      clients.add(client);
      // Oversized frames and broken connections end this client only (ws closes it with 1009 / 1002).
      ws.on('error', (err) => {
        // ws itself then closes the connection with the right code (1009 for a frame over the cap).
        log(`client ${client.id}: ${err.message}; closing that connection`);
        clients.delete(client);
      });
      if (child) send(client, event('engine.ready', { engine: ENGINE_NAME, restarted: false }));
      ws.on('message', (data, isBinary) => {
        let m: Message;
        let raw: unknown = null;
        try {
          if (!isBinary) throw new Error('text frames are not accepted; send binary protocol frames');
          const buf = Array.isArray(data) ? Buffer.concat(data) : Buffer.from(data as ArrayBuffer);
          raw = decodeFrame(new Uint8Array(buf.buffer, buf.byteOffset, buf.byteLength));
          m = parseMessage(raw);
        } catch (err) {
          // Answer under the request's own id when it has one, so the caller's wait ends with the error.
          const id = typeof (raw as { id?: unknown } | null)?.id === 'number' ? (raw as { id: number }).id : -1;
          send(client, { v: PROTOCOL_VERSION, type: 'response', id, ok: false, error: { code: 'protocol', message: (err as Error).message } } as ResponseMessage);
          return;
        }
        if (m.type !== 'request') return;
        if (!child || !child.connected) {
          send(client, { v: PROTOCOL_VERSION, type: 'response', id: m.id, ok: false, error: { code: 'engine-stopped', message: 'the engine is restarting; try again in a moment' } });
          return;
        }
        const hostId = nextId++;
        routes.set(hostId, { client, id: m.id });
        const declared = (m.method === 'project.open' || m.method === 'project.lock') && (m.params as { session?: unknown }).session;
        if (typeof declared === 'string' && declared) {
          // A connection speaks for one session for its whole life: a tab cannot switch to another
          // tab's session (a reload opens a new connection and declares its own again).
          if (client.session !== undefined && client.session !== declared) {
            routes.delete(hostId);
            send(client, { v: PROTOCOL_VERSION, type: 'response', id: m.id, ok: false, error: { code: 'bad-request', message: 'this window already has a session; it cannot take another window\'s' } });
            return;
          }
          client.session = declared;
        }
        // Whatever the client put in the envelope, the shell decides which session it speaks for.
        const forwarded: Message = { ...m, id: hostId, session: client.session ?? `web-connection-${client.id}` };
        if (m.method === 'job.cancel') {
          // The engine sees host-wide request ids: translate the client's.
          const target = (m.params as { requestId: number }).requestId;
          const hostTarget = [...routes].find(([, r]) => r.client === client && r.id === target)?.[0] ?? -1;
          (forwarded as { params: unknown }).params = { requestId: hostTarget };
        }
        child.send(forwarded);
      });
      ws.on('close', () => clients.delete(client));
    });
  });

  await new Promise<void>((ok, fail) => {
    server.once('error', fail);
    server.listen(options.port ?? 0, '127.0.0.1', () => ok());
  });
  const port = (server.address() as { port: number }).port;
  const url = `http://127.0.0.1:${port}/?token=${token}`;
  return {
    url,
    token,
    killEngine: () => child?.kill('SIGKILL'),
    close: async () => {
      closing = true;
      child?.kill();
      for (const c of clients) c.ws.terminate();
      await new Promise<void>((ok) => wss.close(() => ok()));
      await new Promise<void>((ok) => server.close(() => ok()));
    },
  };
}

if (process.argv[1] && resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  const args = process.argv.slice(2);
  const portArg = args.indexOf('--port');
  const shell = await startWebShell({
    port: portArg >= 0 ? Number(args[portArg + 1]) : Number(process.env.PLUMBLINE_PORT) || 0,
    testHooks: process.env.PLUMBLINE_TEST_HOOKS === '1',
  });
  process.stdout.write(`Plumbline web shell (127.0.0.1 only). Open:\n  ${shell.url}\n`);
  const stop = async () => {
    await shell.close();
    process.exit(0);
  };
  process.on('SIGINT', stop);
  process.on('SIGTERM', stop);
}
