/**
 * Outside reference for invalid UTF-8 handling: python3's UTF-8 codec with an error handler that
 * substitutes U+FFFD and counts its calls (one call per maximal invalid subsequence, as in
 * TextDecoder) must give the same text and the same count as the readers.
 */
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { gzipSync } from 'node:zlib';
import { afterAll, describe, expect, it } from 'vitest';
import type { InputConfig } from '../src/config/types.js';
import { emptyIngestStats, readDocuments, type Document } from '../src/ingest/index.js';
import { pythonAvailable, runPythonJson } from './helpers/python.js';

const PYTHON_DECODE = String.raw`
import codecs, json, sys
calls = [0]
def count_and_replace(err):
    calls[0] += 1
    return ('\ufffd', err.end)
codecs.register_error('count_and_replace', count_and_replace)

data = open(json.load(sys.stdin)['file'], 'rb').read()
calls[0] = 0
whole = data.decode('utf-8', 'count_and_replace')
whole_count = calls[0]
calls[0] = 0
lines = []
for number, raw in enumerate(data.split(b'\n'), start=1):
    if raw.endswith(b'\r'):
        raw = raw[:-1]
    lines.append([number, raw.decode('utf-8', 'count_and_replace')])
json.dump({'whole': whole, 'wholeCount': whole_count, 'lines': lines, 'lineCount': calls[0]}, sys.stdout)
`;

/** Deterministic test bytes (a linear congruential generator): words, multi-byte characters, stray bytes, line ends. */
function mixedBytes(size: number): Buffer {
  let state = 12345;
  const next = (n: number): number => {
    state = (Math.imul(state, 1103515245) + 12345) >>> 0;
    return (state >>> 8) % n;
  };
  const pieces: Buffer[] = [Buffer.from('start ')];
  let length = 6;
  const valid = ['é', 'ß', '€', '東', '𝒜', '\uFFFD', 'word ', 'kettle ', '\n', '\r\n', ' '];
  while (length < size) {
    const roll = next(10);
    let piece: Buffer;
    if (roll < 6) piece = Buffer.from(valid[next(valid.length)]);
    else if (roll < 8) piece = Buffer.from([0x80 + next(0x80)]); // a stray byte >= 0x80
    else if (roll < 9) piece = Buffer.from('€').subarray(0, 1 + next(2)); // a truncated character
    else piece = Buffer.from([0xf0 + next(8), 0x80 + next(0x40), 0x80 + next(0x40)]); // a 4-byte lead, maybe cut short
    pieces.push(piece);
    length += piece.length;
  }
  return Buffer.concat(pieces);
}

const INPUT: InputConfig = { paths: [], format: 'text-file', textField: 'text', idField: null, onBadRecord: 'fail' };
const tmp = mkdtempSync(path.join(tmpdir(), 'kindred-utf8ref-'));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

async function read(file: string, format: InputConfig['format']): Promise<{ docs: Document[]; replaced: number }> {
  const stats = emptyIngestStats();
  const docs: Document[] = [];
  for await (const d of readDocuments([file], { ...INPUT, format }, stats)) docs.push(d);
  return { docs, replaced: stats.invalidUtf8Replaced };
}

interface PyResult {
  whole: string;
  wholeCount: number;
  lines: Array<[number, string]>;
  lineCount: number;
}

describe('invalid UTF-8 against python codecs (outside reference)', () => {
  it.skipIf(!pythonAvailable())('text, line numbers and replacement counts match python, plain and gzipped', async () => {
    const bytes = mixedBytes(300_000); // several 64 KiB read chunks, so characters straddle chunk boundaries
    const plain = path.join(tmp, 'mixed.txt');
    writeFileSync(plain, bytes);
    const packed = path.join(tmp, 'mixed-packed.txt');
    writeFileSync(packed, gzipSync(bytes));
    expect(readFileSync(plain).subarray(0, 3).equals(Buffer.from([0xef, 0xbb, 0xbf]))).toBe(false);

    const py = runPythonJson<PyResult>(['-c', PYTHON_DECODE], { file: plain });
    expect(py.wholeCount).toBeGreaterThan(1000);

    for (const file of [plain, packed]) {
      const whole = await read(file, 'text-file');
      expect(whole.docs.length).toBe(1);
      expect(whole.docs[0].text === py.whole).toBe(true);
      expect(whole.replaced).toBe(py.wholeCount);

      const lines = await read(file, 'text-lines');
      const expected = py.lines.filter(([, text]) => /\S/.test(text));
      expect(lines.docs.map((d) => [d.line, d.text])).toEqual(expected);
      expect(lines.replaced).toBe(py.lineCount);
    }
  });
});
