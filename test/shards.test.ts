/** Shard files round-trip through several record batches (checked by reading back, with apache-arrow's reader). */
import { describe, it, expect } from 'vitest';
import { mkdtempSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { ShardWriter, readShard, readArrowTable } from '../src/store/shards.js';

describe('ShardWriter', () => {
  for (const valueType of ['float32', 'float64'] as const) {
    it(`writes ${valueType} shards larger than one record batch`, async () => {
      const file = path.join(mkdtempSync(path.join(os.tmpdir(), 'kindred-shard-')), 'part.arrow');
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
    });
  }
});
