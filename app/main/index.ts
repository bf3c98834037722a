// Electron main: windows, menus, dialogs, settings and the engine's lifecycle. It stays thin:
// the engine runs in a utilityProcess and talks to the renderer over a MessagePort directly.
import { app, BrowserWindow, Menu, MessageChannelMain, dialog, nativeTheme, net, protocol, safeStorage, session, utilityProcess, ipcMain, type UtilityProcess, type MenuItemConstructorOptions } from 'electron';
import Store from 'electron-store';
import { existsSync, renameSync, statSync, writeFileSync } from 'node:fs';
import { dirname, join, normalize, resolve, sep } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { DESKTOP_CHANNELS as C, desktopSchemas } from '../protocol/desktop.ts';
import { APP_ORIGIN, guarded } from './ipc.ts';
import { event } from '../protocol/messages.ts';
import { devToolsAllowed, hardenContents, hardenSession } from './guards.ts';

const here = dirname(fileURLToPath(import.meta.url));
const outDir = resolve(here, '..');
const rendererDir = join(outDir, 'renderer');
const RESTART_DELAYS = [200, 1000, 3000, 10000];
const CSP = "default-src 'none'; script-src 'self'; style-src 'self' 'unsafe-inline'; img-src 'self' data: blob:; font-src 'self'; base-uri 'none'; form-action 'none'; frame-ancestors 'none'; object-src 'none'";

if (process.env.PLUMBLINE_USER_DATA) app.setPath('userData', resolve(process.env.PLUMBLINE_USER_DATA));

interface Settings {
  theme: 'dark' | 'light' | 'system';
  threads: number;
  recent: string[];
  farmUrl: string;
  /** The farm password sealed by safeStorage (the OS keychain), base64; never stored in clear. */
  farmPasswordSealed: string;
}
const store = new Store<Settings>({
  name: 'settings',
  schema: {
    theme: { type: 'string', enum: ['dark', 'light', 'system'], default: 'system' },
    threads: { type: 'integer', minimum: 1, maximum: 256, default: 1 },
    recent: { type: 'array', items: { type: 'string' }, maxItems: 12, default: [] },
    farmUrl: { type: 'string', maxLength: 2048, default: '' },
    farmPasswordSealed: { type: 'string', default: '' },
  },
});

app.enableSandbox();
protocol.registerSchemesAsPrivileged([{ scheme: 'app', privileges: { standard: true, secure: true, supportFetchAPI: true } }]);

let win: BrowserWindow | null = null;
let engine: UtilityProcess | null = null;
let engineRestarts = 0;
let quitting = false;

function startEngine(restarted: boolean): void {
  const entry = join(outDir, 'engine', 'utility-entry.js');
  const env: Record<string, string> = { ...(process.env as Record<string, string>), PLUMBLINE_THREADS: String(store.get('threads')) };
  if (app.isPackaged) env.PLUMBLINE_RESOURCES = process.resourcesPath;
  const child = utilityProcess.fork(entry, [], { serviceName: 'plumbline-engine', env, stdio: 'inherit' });
  engine = child;
  child.once('spawn', () => {
    engineRestarts = 0;
    connectWindow(restarted);
  });
  child.once('exit', (code) => {
    if (engine === child) engine = null;
    if (quitting) return;
    // The same protocol event the web shell sends: the renderer settles every pending request
    // with 'engine-stopped' and recovers when the restarted engine says engine.ready.
    win?.webContents.send(C.engineStopped, event('engine.stopped', { reason: `exited with code ${code}`, code, restarting: true }));
    const delay = RESTART_DELAYS[Math.min(engineRestarts++, RESTART_DELAYS.length - 1)];
    setTimeout(() => !quitting && startEngine(true), delay);
  });
}

/** Hands the window a fresh MessagePort to the engine. */
function connectWindow(restarted: boolean): void {
  if (!win || !engine) return;
  const { port1, port2 } = new MessageChannelMain();
  engine.postMessage({ type: 'attach-port', restarted }, [port1]);
  win.webContents.postMessage(C.enginePort, null, [port2]);
}

function serveRenderer(): void {
  protocol.handle('app', async (request) => {
    const url = new URL(request.url);
    if (url.host !== 'plumbline') return new Response('not found', { status: 404 });
    let rel: string;
    try {
      rel = decodeURIComponent(url.pathname === '/' ? '/index.html' : url.pathname).replace(/^\/+/, '');
    } catch {
      return new Response('malformed URL', { status: 400 }); // '%' without two hex digits
    }
    const file = normalize(join(rendererDir, rel));
    // Refuse anything that escapes the renderer folder (the API's own example does not check).
    if (!file.startsWith(rendererDir + sep) || !existsSync(file) || !statSync(file).isFile()) return new Response('not found', { status: 404 });
    const res = await net.fetch(pathToFileURL(file).toString());
    const headers = new Headers(res.headers);
    headers.set('content-security-policy', CSP);
    headers.set('x-content-type-options', 'nosniff');
    return new Response(res.body, { status: res.status, headers });
  });
}

function createWindow(): void {
  const dark = nativeTheme.shouldUseDarkColors;
  win = new BrowserWindow({
    width: 1360,
    height: 860,
    minWidth: 980,
    minHeight: 640,
    show: false,
    title: 'Plumbline',
    backgroundColor: dark ? '#14181d' : '#f3f1ec',
    webPreferences: {
      preload: join(outDir, 'preload', 'index.cjs'),
      contextIsolation: true,
      sandbox: true,
      nodeIntegration: false,
      nodeIntegrationInWorker: false,
      webSecurity: true,
      spellcheck: false,
      devTools: devToolsAllowed(app.isPackaged),
    },
  });
  win.once('ready-to-show', () => win?.show());
  // Navigation, redirects, frames, new windows and webviews: app/main/guards.ts.
  hardenContents(win.webContents);
  win.webContents.on('did-finish-load', () => connectWindow(false));
  win.on('closed', () => (win = null));
  void win.loadURL(`${APP_ORIGIN}/index.html`);
}

function buildMenu(): void {
  const send = (command: string, arg?: string) => win?.webContents.send(C.menu, command, arg);
  const recent = store.get('recent');
  const template: MenuItemConstructorOptions[] = [
    ...(process.platform === 'darwin' ? [{ role: 'appMenu' as const }] : []),
    {
      label: 'File',
      submenu: [
        { label: 'Open Generator…', accelerator: 'CmdOrCtrl+O', click: () => send('open-generator') },
        { label: 'Open Directions…', accelerator: 'CmdOrCtrl+Shift+O', click: () => send('open-directions') },
        {
          label: 'Open Recent',
          submenu: recent.length ? recent.map((p) => ({ label: p, click: () => send('open-recent', p) })) : [{ label: 'No recent files', enabled: false }],
        },
        { type: 'separator' },
        process.platform === 'darwin' ? { role: 'close' } : { role: 'quit' },
      ],
    },
    {
      label: 'Edit',
      submenu: [
        // App-level undo goes to the renderer's command stack; text fields keep native editing.
        { label: 'Undo', accelerator: 'CmdOrCtrl+Z', click: () => send('undo') },
        { label: 'Redo', accelerator: process.platform === 'win32' ? 'Ctrl+Y' : 'Shift+CmdOrCtrl+Z', click: () => send('redo') },
        { type: 'separator' },
        { role: 'cut' },
        { role: 'copy' },
        { role: 'paste' },
        { role: 'selectAll' },
      ],
    },
    { label: 'View', submenu: [{ role: 'togglefullscreen' }, ...(app.isPackaged ? [] : [{ role: 'toggleDevTools' as const }])] },
  ];
  Menu.setApplicationMenu(Menu.buildFromTemplate(template));
}

function registerIpc(): void {
  const isMainFrame = (e: Pick<Electron.IpcMainInvokeEvent, 'senderFrame'>) => !!win && e.senderFrame === win.webContents.mainFrame;
  ipcMain.handle(C.chooseFile, guarded(desktopSchemas[C.chooseFile], async ({ kind }) => {
    if (!win) return null;
    if (kind === 'project' || kind === 'folder') {
      const r = await dialog.showOpenDialog(win, { properties: ['openDirectory', 'createDirectory'] });
      return r.canceled ? null : r.filePaths[0] ?? null;
    }
    if (kind === 'pack-save') {
      const r = await dialog.showSaveDialog(win, { filters: [{ name: 'Preset packs', extensions: ['plpack'] }] });
      return r.canceled ? null : r.filePath ?? null;
    }
    const filters = kind === 'generator' ? [{ name: 'Generators and model cards', extensions: ['json', 'onnx'] }] : kind === 'pack' ? [{ name: 'Preset packs', extensions: ['plpack'] }] : [{ name: 'Directions', extensions: ['npy', 'json'] }];
    const r = await dialog.showOpenDialog(win, { properties: ['openFile'], filters });
    return r.canceled ? null : r.filePaths[0] ?? null;
  }, isMainFrame));
  ipcMain.handle(C.printPdf, guarded(desktopSchemas[C.printPdf], async ({ html, name }) => {
    if (!win) return null;
    const target = await dialog.showSaveDialog(win, { defaultPath: `${name}.pdf`, filters: [{ name: 'PDF', extensions: ['pdf'] }] });
    if (target.canceled || !target.filePath) return null;
    // An offscreen, script-less window renders the report (it fetches nothing: images are data URIs).
    const page = new BrowserWindow({ show: false, webPreferences: { javascript: false, sandbox: true, contextIsolation: true } });
    try {
      await page.loadURL(`data:text/html;charset=utf-8,${encodeURIComponent(html)}`);
      const pdf = await page.webContents.printToPDF({ printBackground: true, pageSize: 'A4' });
      // Atomic: a temporary file beside the target, then a rename.
      const temp = `${target.filePath}.${process.pid}.tmp`;
      writeFileSync(temp, pdf);
      renameSync(temp, target.filePath);
      return target.filePath;
    } finally {
      page.destroy();
    }
  }, isMainFrame));
  ipcMain.handle(C.recentList, guarded(desktopSchemas[C.recentList], () => store.get('recent'), isMainFrame));
  ipcMain.handle(C.recentAdd, guarded(desktopSchemas[C.recentAdd], ({ path }) => {
    store.set('recent', [path, ...store.get('recent').filter((p) => p !== path)].slice(0, 12));
    app.addRecentDocument(path);
    buildMenu();
  }, isMainFrame));
  ipcMain.handle(C.settingGet, guarded(desktopSchemas[C.settingGet], ({ key }) => store.get(key), isMainFrame));
  ipcMain.handle(C.settingSet, guarded(desktopSchemas[C.settingSet], (p) => {
    if (p.key === 'theme') {
      store.set('theme', p.value);
      nativeTheme.themeSource = p.value;
    } else if (p.key === 'farmUrl') store.set('farmUrl', p.value);
    else store.set('threads', p.value);
  }, isMainFrame));
  // Secrets go through safeStorage (Keychain, DPAPI or the Secret Service); without it, nothing is stored.
  ipcMain.handle(C.secretGet, guarded(desktopSchemas[C.secretGet], () => {
    const sealed = store.get('farmPasswordSealed');
    if (!sealed || !safeStorage.isEncryptionAvailable()) return null;
    return safeStorage.decryptString(Buffer.from(sealed, 'base64'));
  }, isMainFrame));
  ipcMain.handle(C.secretSet, guarded(desktopSchemas[C.secretSet], ({ value }) => {
    if (!safeStorage.isEncryptionAvailable()) throw new Error('the OS keychain is not available; the farm password is kept for this session only');
    store.set('farmPasswordSealed', value ? safeStorage.encryptString(value).toString('base64') : '');
  }, isMainFrame));
}

app.whenReady().then(() => {
  hardenSession(session.defaultSession);
  nativeTheme.themeSource = store.get('theme');
  serveRenderer();
  registerIpc();
  buildMenu();
  createWindow();
  startEngine(false);
  app.on('activate', () => BrowserWindow.getAllWindows().length === 0 && createWindow());
});

app.on('web-contents-created', (_e, contents) => hardenContents(contents));
app.on('before-quit', () => {
  quitting = true;
  engine?.kill();
});
app.on('window-all-closed', () => process.platform !== 'darwin' && app.quit());
