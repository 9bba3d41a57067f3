/**
 * Input splits (src/ingest/split.ts): byte ranges cut at line starts read back exactly the documents of the
 * streaming readers of src/ingest/readers.ts (the reference here), with the same ingest counters, whatever
 * the split size; a bad JSON line in a later split is reported at its true line number.
 */
import { describe, it, expect, afterAll } from 'vitest';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { gzipSync } from 'node:zlib';
import os from 'node:os';
import path from 'node:path';
import { validateConfig } from '../src/config/index.js';
import { readDocuments, emptyIngestStats } from '../src/ingest/index.js';
import { planSplits, readSplit } from '../src/ingest/split.js';

const dir = mkdtempSync(path.join(os.tmpdir(), 'kindred-splits-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

function input(format: string, onBadRecord = 'fail') {
  return validateConfig({ input: { paths: ['x'], format, onBadRecord } }, 'test').input;
}

function corpusLines(): string[] {
  const lines: string[] = [];
  for (let i = 0; i < 400; i++) {
    if (i % 37 === 0) lines.push('');
    else if (i % 41 === 0) lines.push(' \t ');
    else if (i % 43 === 0) lines.push('caf\u00e9 na\u00efve \u2019quoted\u2019 \u6771\u4eac');
    else lines.push(`line ${i} ${'word '.repeat(i % 13)}end`);
  }
  return lines;
}

async function viaReaders(file: string, format: string) {
  const stats = emptyIngestStats();
  const docs: string[] = [];
  for await (const d of readDocuments([file], input(format), stats)) docs.push(d.text);
  return { docs, stats };
}

async function viaSplits(file: string, format: string, target: number) {
  const stats = emptyIngestStats();
  const docs: string[] = [];
  const splits = planSplits([file], input(format), target);
  for (const s of splits) {
    await readSplit(s, input(format), stats, { bytes: (b, st, e) => docs.push(Buffer.from(b.subarray(st, e)).toString('utf8')), text: (t) => docs.push(t) }, () => {});
  }
  return { docs, stats, splits };
}

describe('input splits', () => {
  const text = '\ufeff' + corpusLines().join('\r\n') + '\n' + 'last line without end';
  const raw = Buffer.concat([Buffer.from(text, 'utf8'), Buffer.from([0x0a, 0x62, 0xff, 0xfe, 0x61, 0x0a])]);
  const plain = path.join(dir, 'plain.txt');
  writeFileSync(plain, raw);
  const gz = path.join(dir, 'packed.txt.gz');
  writeFileSync(gz, gzipSync(raw));

  for (const target of [64, 500, 4096, 1 << 20]) {
    it(`text-lines cut into ~${target}-byte ranges reads the documents of the streaming reader`, async () => {
      const expected = await viaReaders(plain, 'text-lines');
      const got = await viaSplits(plain, 'text-lines', target);
      if (target < 4096) expect(got.splits.length).toBeGreaterThan(3);
      for (const s of got.splits.slice(1)) expect(raw[s.start - 1]).toBe(0x0a);
      expect(got.splits.map((s) => s.end - s.start).reduce((a, b) => a + b, 0)).toBe(raw.length);
      expect(got.docs).toEqual(expected.docs);
      expect(got.stats).toEqual(expected.stats);
      expect(got.stats.invalidUtf8Replaced).toBe(2);
    });
  }

  it('a gzip file is one whole-file split and reads the same documents', async () => {
    const got = await viaSplits(gz, 'text-lines', 64);
    expect(got.splits).toHaveLength(1);
    expect(got.splits[0].whole).toBe(true);
    expect(got.docs).toEqual((await viaReaders(gz, 'text-lines')).docs);
  });

  it('jsonl: split reading gives the reader\'s texts; a bad line in a later split names its true line', async () => {
    const lines = Array.from({ length: 300 }, (_, i) => JSON.stringify({ text: `record ${i} \u00e9t\u00e9 ${'x '.repeat(i % 7)}` }));
    const file = path.join(dir, 'records.jsonl');
    writeFileSync(file, lines.join('\n') + '\n');
    expect((await viaSplits(file, 'jsonl', 256)).docs).toEqual((await viaReaders(file, 'jsonl')).docs);
    lines[250] = '{"text": broken';
    writeFileSync(file, lines.join('\n') + '\n');
    await expect(viaSplits(file, 'jsonl', 256)).rejects.toThrow(`${file}:251: invalid JSON record`);
    const skipped = emptyIngestStats();
    for (const s of planSplits([file], input('jsonl', 'skip'), 256)) await readSplit(s, input('jsonl', 'skip'), skipped, { bytes: () => {}, text: () => {} }, () => {});
    expect(skipped.badRecordsSkipped).toBe(1);
    expect(skipped.documents).toBe(299);
    expect(readFileSync(file).length).toBe(skipped.bytes);
  });
});
