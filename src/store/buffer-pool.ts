/**
 * Byte buffers handed back after use and handed out again, per thread: fresh memory is slow to touch (on the
 * benchmark machine about 3.4 ms per MiB the first time), and the count and weight tasks each open a few
 * writers and readers with buffers of the same few sizes.
 */
const spare: Buffer[] = [];
/** Most buffers kept for reuse (the rest are left to the garbage collector). */
const MAX_SPARE = 8;

/** A buffer of exactly `bytes` bytes (contents undefined), reused when one was given back. */
export function takeBuffer(bytes: number): Buffer {
  const i = spare.findIndex((b) => b.length === bytes);
  return i >= 0 ? spare.splice(i, 1)[0] : Buffer.allocUnsafeSlow(bytes);
}

/** Gives a buffer back for reuse; the caller must not touch it (nor views of it) afterwards. */
export function giveBuffer(buf: Buffer): void {
  if (spare.length < MAX_SPARE && !spare.includes(buf)) spare.push(buf);
}
