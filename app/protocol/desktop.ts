// Channel names and payload schemas for the few Electron main ↔ preload calls (file dialogs,
// recent files, settings, menu commands). Engine traffic does not go through here: it uses the
// MessagePort and the schema in messages.ts.
import { z } from 'zod';
import { DESKTOP_CHANNELS } from './channels.ts';

export { DESKTOP_CHANNELS, MENU_COMMANDS, type MenuCommand } from './channels.ts';

export const settingKey = z.enum(['theme', 'threads', 'farmUrl']);
export const secretKey = z.enum(['farmPassword']);
export const desktopSchemas = {
  /** pack: an existing .plpack; pack-save: where to write one; folder: an output folder. */
  [DESKTOP_CHANNELS.chooseFile]: z.object({ kind: z.enum(['generator', 'directions', 'project', 'pack', 'pack-save', 'folder']) }),
  /** A self-contained HTML report printed to PDF by Chromium, saved where the user picks. */
  [DESKTOP_CHANNELS.printPdf]: z.object({ html: z.string().min(1).max(64 * 1024 * 1024), name: z.string().regex(/^[A-Za-z0-9_. -]{1,120}$/) }),
  [DESKTOP_CHANNELS.recentList]: z.object({}),
  [DESKTOP_CHANNELS.recentAdd]: z.object({ path: z.string().min(1).max(4096) }),
  [DESKTOP_CHANNELS.settingGet]: z.object({ key: settingKey }),
  [DESKTOP_CHANNELS.settingSet]: z.discriminatedUnion('key', [
    z.object({ key: z.literal('theme'), value: z.enum(['dark', 'light', 'system']) }),
    z.object({ key: z.literal('threads'), value: z.number().int().min(1).max(256) }),
    z.object({ key: z.literal('farmUrl'), value: z.string().max(2048) }),
  ]),
  [DESKTOP_CHANNELS.secretGet]: z.object({ key: secretKey }),
  [DESKTOP_CHANNELS.secretSet]: z.object({ key: secretKey, value: z.string().max(1024) }),
} as const;

