// Every main-process IPC handler goes through `handle`, which checks that the sender is our own
// page in a main frame and validates the payload before the handler sees it.
import type { IpcMainInvokeEvent } from 'electron';
import type { z } from 'zod';

export const APP_ORIGIN = 'app://plumbline';

export function senderAllowed(event: Pick<IpcMainInvokeEvent, 'senderFrame'>, isMainFrame: (e: Pick<IpcMainInvokeEvent, 'senderFrame'>) => boolean): boolean {
  const frame = event.senderFrame;
  if (!frame) return false;
  let origin: string;
  try {
    origin = new URL(frame.url).origin;
  } catch {
    return false;
  }
  // Custom standard schemes report an opaque origin string in some versions; compare scheme + host.
  const u = new URL(frame.url);
  const ours = origin === APP_ORIGIN || (u.protocol === 'app:' && u.host === 'plumbline');
  return ours && isMainFrame(event);
}

export type Handler<S extends z.ZodType> = (payload: z.infer<S>, event: IpcMainInvokeEvent) => unknown;

export function guarded<S extends z.ZodType>(schema: S, handler: Handler<S>, isMainFrame: (e: Pick<IpcMainInvokeEvent, 'senderFrame'>) => boolean) {
  return async (event: IpcMainInvokeEvent, payload: unknown) => {
    if (!senderAllowed(event, isMainFrame)) throw new Error('refused: IPC from a frame that is not the Plumbline window');
    const parsed = schema.safeParse(payload);
    if (!parsed.success) throw new Error(`refused: invalid payload (${parsed.error.issues.map((i) => i.message).join('; ')})`);
    return handler(parsed.data, event);
  };
}
