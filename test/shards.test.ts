/** Shard files round-trip through several record batches (checked by reading back, with apache-arrow's reader). */
import { describe, it, expect, afterAll } from 'vitest';
import { createHash } from 'node:crypto';
import { mkdtempSync, readFileSync, rmSync, statSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { ShardWriter, readShard, readShardBlocks, readArrowTable } from '../src/store/shards.js';

/** One folder for every case's files, removed at the end. */
const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-shard-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));

describe('ShardWriter', () => {
  for (const valueType of ['float32', 'float64'] as const) {
    it(`writes ${valueType} shards larger than one record batch`, async () => {
      const file = path.join(mkdtempSync(path.join(work, 'case-')), 'part.arrow');
      const w = new ShardWriter(file, valueType);
      const nRows = 2500;
      const perRow = 1000;
      for (let r = 0; r < nRows; r++) for (let c = 0; c < perRow; c++) w.append(100 + r, c * 3, r + c / 4);
      await w.close();
      const table = readArrowTable(file);
      expect(table.batches.length).toBeGreaterThan(2);
      expect(table.schema.fields.map((f) => `${f.name}:${f.type}`)).toEqual(['row:Uint32', 'col:Uint32', `value:${valueType === 'float32' ? 'Float32' : 'Float64'}`]);
      const block = readShard(file, 100, 100 + nRows);
      expect(block.indptr[nRows]).toBe(nRows * perRow);
      expect(block.cols[perRow * 7 + 5]).toBe(15);
      expect(block.values[perRow * 7 + 5]).toBe(7 + 5 / 4);
      // the checksum taken while writing is the file's own: size from stat, SHA-256 by node:crypto over its bytes
      expect(w.checksum).toEqual({ bytes: statSync(file).size, sha256: createHash('sha256').update(readFileSync(file)).digest('hex') });
    });
  }

  it('hands each record batch to the file as it is written, not at close (memory stays at one batch)', async () => {
    const file = path.join(mkdtempSync(path.join(work, 'case-')), 'part.arrow');
    const w = new ShardWriter(file, 'float64');
    // a synchronous loop, as in the k-way merge: nothing awaits between batches
    for (let i = 0; i < 3 * (1 << 20); i++) w.append(i >>> 10, i & 1023, i);
    expect(statSync(file).size).toBeGreaterThan(2 * (1 << 20) * 16);
    await w.close();
    expect(readShard(file, 0, 3 << 10).indptr[3 << 10]).toBe(3 * (1 << 20));
  });

  it('streams blocks of complete rows that together equal the whole shard, rows spanning batches included', async () => {
    const file = path.join(mkdtempSync(path.join(work, 'case-')), 'part.arrow');
    const w = new ShardWriter(file, 'float64');
    // rows of 0 .. 1.5M entries, so some rows span two or three record batches of 2^20 entries
    const lengths = [3, 1_500_000, 0, 700_000, 5, 1_100_000, 1];
    lengths.forEach((len, r) => {
      for (let c = 0; c < len; c++) w.append(10 + r, c, r * 1e7 + c);
    });
    await w.close();
    const whole = readShard(file, 10, 10 + lengths.length);
    const seen: number[] = [];
    let entries = 0;
    for await (const block of readShardBlocks(file, 10, 10 + lengths.length)) {
      for (let r = 0; r < block.indptr.length - 1; r++) {
        const row = block.firstRow + r;
        const n = block.indptr[r + 1] - block.indptr[r];
        if (n === 0) continue;
        seen.push(row);
        expect(n).toBe(lengths[row - 10]);
        const a = block.indptr[r];
        const wa = whole.indptr[row - 10];
        expect(block.cols[a + n - 1]).toBe(whole.cols[wa + n - 1]);
        expect(block.values[a + n - 1]).toBe(whole.values[wa + n - 1]);
        entries += n;
      }
    }
    expect(seen).toEqual([10, 11, 13, 14, 15, 16]);
    expect(entries).toBe(whole.indptr[lengths.length]);
  });
});
