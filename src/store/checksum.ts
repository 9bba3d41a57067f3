import { createHash } from 'node:crypto';
import { createReadStream } from 'node:fs';

/** SHA-256 of a file's bytes, streamed; `onBytes` hears the size of every chunk read. */
export async function sha256File(file: string, onBytes?: (n: number) => void): Promise<string> {
  const hash = createHash('sha256');
  for await (const chunk of createReadStream(file, { highWaterMark: 1 << 20 })) {
    hash.update(chunk as Buffer);
    onBytes?.((chunk as Buffer).length);
  }
  return hash.digest('hex');
}

export function sha256Text(text: string | Uint8Array): string {
  return createHash('sha256').update(text).digest('hex');
}
