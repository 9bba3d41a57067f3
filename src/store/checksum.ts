import { createHash } from 'node:crypto';
import { promises as fsp } from 'node:fs';

const CHUNK_BYTES = 1 << 20;

/**
 * SHA-256 of a file's bytes, read through one reused buffer (a fresh buffer per chunk made hashing a cold
 * file several times slower); `onBytes` hears the size of every chunk read.
 */
export async function sha256File(file: string, onBytes?: (n: number) => void): Promise<string> {
  const hash = createHash('sha256');
  const handle = await fsp.open(file, 'r');
  try {
    const buf = Buffer.allocUnsafeSlow(CHUNK_BYTES);
    for (;;) {
      const { bytesRead } = await handle.read(buf, 0, CHUNK_BYTES, null);
      if (bytesRead === 0) break;
      hash.update(buf.subarray(0, bytesRead));
      onBytes?.(bytesRead);
    }
  } finally {
    await handle.close();
  }
  return hash.digest('hex');
}

export function sha256Text(text: string | Uint8Array): string {
  return createHash('sha256').update(text).digest('hex');
}
