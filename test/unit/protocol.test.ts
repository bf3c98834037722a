// The shared protocol: validation at the boundary and binary framing.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { parseMessage, parseResult, request, PROTOCOL_VERSION } from '../../app/protocol/messages.ts';
import { decodeFrame, encodeFrame } from '../../app/protocol/frames.ts';

test('a valid request passes and its parameters are checked per method', () => {
  const m = parseMessage(request(3, 'preview.render', { seed: 4, psi: 0.7, edits: [{ direction: 'd1', strength: 1.5 }] }));
  assert.equal(m.type, 'request');
  assert.throws(() => parseMessage(request(3, 'preview.render', { seed: -1, psi: 0.7, edits: [] } as never)), /bad parameters for preview.render: seed/);
  assert.throws(() => parseMessage({ v: PROTOCOL_VERSION, type: 'request', id: 1, method: 'fs.delete', params: {} }), /bad request: method/);
  assert.throws(() => parseMessage({ v: 99, type: 'request', id: 1, method: 'engine.hello', params: {} }), /bad request: v/);
  assert.throws(() => parseMessage('hello'), /expected a message object/);
  assert.throws(() => parseMessage({ type: 'shell' }), /unknown message type/);
});

test('events and responses are validated too', () => {
  assert.throws(() => parseMessage({ v: 1, type: 'event', event: 'job.progress', data: { jobId: 'x' } }), /bad data for event job.progress/);
  const ok = parseMessage({ v: 1, type: 'response', id: 2, ok: false, error: { code: 'not-onnx', message: 'm' } });
  assert.equal(ok.type, 'response');
  assert.throws(() => parseResult('preview.render', { superseded: false, seed: 1 }), /bad result for preview.render/);
});

test('binary frames carry Uint8Array payloads as raw bytes and round-trip exactly', () => {
  const rgba = Uint8Array.from({ length: 64 }, (_, i) => (i * 37) % 256);
  const msg = { v: 1, type: 'response', id: 9, ok: true, result: { superseded: false, seed: 1, image: { width: 4, height: 4, rgba }, attributes: [0.5], millis: 1 } };
  const frame = encodeFrame(msg);
  // The JSON part must not contain the pixel values as text.
  const jsonLength = new DataView(frame.buffer).getUint32(0, true);
  assert.ok(jsonLength < 200, 'image bytes are not inlined in the JSON');
  const back = decodeFrame(frame) as typeof msg;
  assert.ok(back.result.image.rgba instanceof Uint8Array);
  assert.deepEqual(Array.from(back.result.image.rgba), Array.from(rgba));
  assert.deepEqual(parseResult('preview.render', back.result), back.result);
});

test('malformed frames are rejected, not crashed on', () => {
  assert.throws(() => decodeFrame(new Uint8Array([1, 2])), /out of bounds/);
  const f = encodeFrame({ a: new Uint8Array(10) });
  assert.throws(() => decodeFrame(f.subarray(0, f.length - 3)), /exceeds|truncated/);
});
