// Channel names for the few Electron main ↔ preload calls. Kept free of dependencies so the
// sandboxed preload bundle stays tiny. Payload schemas are in desktop.ts.
export const DESKTOP_CHANNELS = {
  chooseFile: 'plumbline:choose-file',
  recentList: 'plumbline:recent-list',
  recentAdd: 'plumbline:recent-add',
  settingGet: 'plumbline:setting-get',
  settingSet: 'plumbline:setting-set',
  printPdf: 'plumbline:print-pdf',
  secretGet: 'plumbline:secret-get',
  secretSet: 'plumbline:secret-set',
  menu: 'plumbline:menu',
  enginePort: 'plumbline:engine-port',
  engineStopped: 'plumbline:engine-stopped',
} as const;

export const MENU_COMMANDS = ['open-generator', 'open-directions', 'open-recent', 'undo', 'redo'] as const;
export type MenuCommand = (typeof MENU_COMMANDS)[number];
