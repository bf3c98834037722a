// The preload: the only bridge between the sandboxed renderer and Electron. It exposes one object
// of named functions (window.plumbline), never ipcRenderer itself, and strips Electron's event
// objects before calling listeners. Bundled to a single CommonJS file (sandboxed preloads cannot
// import modules other than electron).
import { contextBridge, ipcRenderer, webUtils } from 'electron';
import { DESKTOP_CHANNELS as C, MENU_COMMANDS } from '../protocol/channels.ts';

// The engine's MessagePort arrives here and is forwarded to the page's main world.
ipcRenderer.on(C.enginePort, (event) => {
  window.postMessage('plumbline:engine-port', window.location.origin, event.ports);
});

contextBridge.exposeInMainWorld('plumbline', {
  platform: 'electron',
  chooseFile: (kind: 'generator' | 'directions' | 'project' | 'pack' | 'pack-save' | 'folder') => ipcRenderer.invoke(C.chooseFile, { kind }),
  printPdf: (html: string, name: string) => ipcRenderer.invoke(C.printPdf, { html, name }),
  pathForFile: (file: File) => webUtils.getPathForFile(file),
  recent: () => ipcRenderer.invoke(C.recentList, {}),
  addRecent: (path: string) => ipcRenderer.invoke(C.recentAdd, { path }),
  getSetting: (key: 'theme' | 'threads' | 'farmUrl') => ipcRenderer.invoke(C.settingGet, { key }),
  setSetting: (key: 'theme' | 'threads' | 'farmUrl', value: unknown) => ipcRenderer.invoke(C.settingSet, { key, value }),
  getSecret: (key: 'farmPassword') => ipcRenderer.invoke(C.secretGet, { key }),
  setSecret: (key: 'farmPassword', value: string) => ipcRenderer.invoke(C.secretSet, { key, value }),
  onMenu: (listener: (command: string, arg?: string) => void) => {
    const handler = (_event: unknown, command: unknown, arg: unknown) => {
      if (typeof command === 'string' && (MENU_COMMANDS as readonly string[]).includes(command)) listener(command, typeof arg === 'string' ? arg : undefined);
    };
    ipcRenderer.on(C.menu, handler);
    return () => ipcRenderer.removeListener(C.menu, handler);
  },
  // Delivers main's engine.stopped protocol event; the page's engine client validates it.
  onEngineStopped: (listener: (message: unknown) => void) => {
    const handler = (_event: unknown, message: unknown) => listener(message);
    ipcRenderer.on(C.engineStopped, handler);
    return () => ipcRenderer.removeListener(C.engineStopped, handler);
  },
});
