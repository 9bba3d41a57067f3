#!/usr/bin/env node
/**
 * Ordering a counted row's touched columns (src/count/rows-map.ts orderColumns): a typed-array sort against the
 * bitmap of all columns read back word by word, side by side for rows touching n of nCols columns (mostly small
 * ids, as frequent terms have). Not part of `npm run bench`; run after `npm run build`:
 *   node scripts/bench/order-columns.mjs
 */
import { orderByBitmap, orderColumns } from '../../dist/count/rows-map.js';
import { mulberry32 } from '../random.mjs';

const rand = mulberry32(1);
console.log('| columns | touched | sort µs | bitmap µs | sort / bitmap | orderColumns µs |');
console.log('|---:|---:|---:|---:|---:|---:|');
for (const nCols of [48_931, 203_042, 3_400_000]) {
  const bits = new Int32Array((nCols + 31) >>> 5);
  const touched = new Uint32Array(nCols);
  for (const n of [64, 256, 512, 1024, 4096, 16_384, 40_000]) {
    const sets = Array.from({ length: 16 }, () => {
      const s = new Set();
      while (s.size < n) s.add(Math.min(nCols - 1, Math.floor(Math.exp(rand() * Math.log(nCols))) - 1));
      return Uint32Array.from(s);
    });
    const reps = Math.max(16, Math.floor(2e6 / n));
    const time = (order) => {
      const t = performance.now();
      for (let r = 0; r < reps; r++) {
        touched.set(sets[r % sets.length]);
        order();
      }
      return ((performance.now() - t) / reps) * 1000;
    };
    const sort = time(() => touched.subarray(0, n).sort());
    const bitmap = time(() => orderByBitmap(touched, n, bits));
    const chosen = time(() => orderColumns(touched, n, bits));
    console.log(`| ${nCols} | ${n} | ${sort.toFixed(1)} | ${bitmap.toFixed(1)} | ${(sort / bitmap).toFixed(2)} | ${chosen.toFixed(1)} |`);
  }
}
