// Binary WebSocket frames for protocol messages. A frame is
//   u32 LE  length of the JSON part
//   JSON    the message, with every Uint8Array replaced by {"$bin": k}
//   then for each binary part k: u32 LE length, bytes
// so images cross the socket as raw bytes.

const MAX_FRAME = 256 * 1024 * 1024;

export function encodeFrame(message: unknown): Uint8Array {
  const parts: Uint8Array[] = [];
  const json = JSON.stringify(message, (_key, value) => {
    if (value instanceof Uint8Array) {
      parts.push(value);
      return { $bin: parts.length - 1 };
    }
    return value;
  });
  const text = new TextEncoder().encode(json);
  let size = 4 + text.length;
  for (const p of parts) size += 4 + p.length;
  const out = new Uint8Array(size);
  const view = new DataView(out.buffer);
  view.setUint32(0, text.length, true);
  out.set(text, 4);
  let at = 4 + text.length;
  for (const p of parts) {
    view.setUint32(at, p.length, true);
    out.set(p, at + 4);
    at += 4 + p.length;
  }
  return out;
}

export function decodeFrame(frame: Uint8Array): unknown {
  if (frame.length < 4 || frame.length > MAX_FRAME) throw new Error(`frame of ${frame.length} bytes is out of bounds`);
  const view = new DataView(frame.buffer, frame.byteOffset, frame.byteLength);
  const jsonLength = view.getUint32(0, true);
  if (4 + jsonLength > frame.length) throw new Error('frame JSON length exceeds the frame');
  const parts: Uint8Array[] = [];
  let at = 4 + jsonLength;
  while (at < frame.length) {
    if (at + 4 > frame.length) throw new Error('truncated binary part header');
    const n = view.getUint32(at, true);
    if (at + 4 + n > frame.length) throw new Error('binary part exceeds the frame');
    parts.push(frame.slice(at + 4, at + 4 + n));
    at += 4 + n;
  }
  const json = new TextDecoder().decode(frame.subarray(4, 4 + jsonLength));
  return JSON.parse(json, (_key, value) => {
    if (value && typeof value === 'object' && !Array.isArray(value) && Object.keys(value).length === 1 && typeof value.$bin === 'number') {
      const part = parts[value.$bin];
      if (!part) throw new Error(`frame refers to missing binary part ${value.$bin}`);
      return part;
    }
    return value;
  });
}
