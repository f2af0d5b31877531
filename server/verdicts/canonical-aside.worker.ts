// Worker thread of canonical-aside.ts: writes the RFC 8785 bytes of big number arrays (a lot's
// measurements) while the main thread runs the engine. Receives the values as a Float64Array and
// hands the bytes back without copying them (the ArrayBuffer is transferred).
import { parentPort } from 'node:worker_threads';
import { numberArrayJsonOrNull } from './canonical';

export interface AsideRequest {
  id: number;
  values: Float64Array;
}
export interface AsideReply {
  id: number;
  /** The bytes, or null when a value is not a finite number (the caller then writes them itself). */
  bytes: { buffer: ArrayBuffer; offset: number; length: number } | null;
}

export type AsideMessage = AsideReply | { ready: true };

parentPort!.on('message', ({ id, values }: AsideRequest) => {
  const b = numberArrayJsonOrNull(values);
  // A result above the pool size owns its ArrayBuffer (Buffer.allocUnsafe), so it can move.
  const own = b !== null && b.byteOffset === 0 && b.length > Buffer.poolSize >>> 1;
  const copy = b === null ? null : own ? b : Buffer.from(b);
  const reply: AsideReply = { id, bytes: copy ? { buffer: copy.buffer as ArrayBuffer, offset: copy.byteOffset, length: copy.length } : null };
  parentPort!.postMessage(reply, copy && own ? [copy.buffer as ArrayBuffer] : []);
});
parentPort!.postMessage({ ready: true } satisfies AsideMessage);
