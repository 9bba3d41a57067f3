/**
 * What this machine's cores share: a few loops timed alone and on two threads side by side (not part of
 * `npm run bench`; run `node scripts/bench/cores.mjs`). A loop that runs as fast side by side as alone uses
 * nothing the two threads share; one that slows down shares a cache, memory or the core itself. Used in
 * docs/performance.md ("What bounds it").
 */
import { Worker, isMainThread, parentPort, workerData } from 'node:worker_threads';

/** Eight independent integer chains: bound by instruction throughput (shared if the cores are hyperthreads of one). */
function throughput(n) {
  let a = 1, b = 2, c = 3, d = 4, e = 5, f = 6, g = 7, h = 8;
  for (let i = 0; i < n; i++) {
    a = (a + i) | 0; b = (b ^ i) | 0; c = (c + (i << 1)) | 0; d = (d ^ (i >> 1)) | 0;
    e = (e + (i | 3)) | 0; f = (f ^ (i & 7)) | 0; g = (g + (i ^ 5)) | 0; h = (h - i) | 0;
  }
  return a ^ b ^ c ^ d ^ e ^ f ^ g ^ h;
}

/** A chain of dependent reads at pseudo-random places of a table of `bytes` bytes. */
function reads(bytes) {
  const mask = bytes / 4 - 1;
  const t = new Int32Array(bytes / 4);
  for (let i = 0; i < t.length; i++) t[i] = Math.imul(i, 0x9e3779b1) & mask;
  return (n) => {
    let x = 0, s = 0;
    for (let i = 0; i < n; i++) {
      x = t[(x + i * 7) & mask];
      s += x;
    }
    return s;
  };
}

/** Writes a byte into every page of `mib` MiB of fresh memory: the cost of first touches. */
function firstTouch(mib) {
  const u = new Uint8Array(new SharedArrayBuffer(mib << 20));
  for (let i = 0; i < u.length; i += 4096) u[i] = 1;
  return u[0];
}

const loops = {
  'throughput (8 integer chains)': { make: () => throughput, n: 3e8 },
  'dependent reads in 16 KiB': { make: () => reads(16 << 10), n: 1e8 },
  'dependent reads in 512 KiB': { make: () => reads(512 << 10), n: 5e7 },
  'dependent reads in 4 MiB': { make: () => reads(4 << 20), n: 2e7 },
  'first touch of 64 MiB': { make: () => () => firstTouch(64), n: 1 },
};

if (!isMainThread) {
  const { name } = workerData;
  const loop = loops[name];
  const fn = loop.make();
  if (loop.n > 1) fn(1e6); // compiled before it is timed
  const t0 = performance.now();
  fn(loop.n);
  parentPort.postMessage(performance.now() - t0);
} else {
  const run = (name, threads) =>
    Promise.all(Array.from({ length: threads }, () => new Promise((resolve, reject) => {
      const w = new Worker(new URL(import.meta.url), { workerData: { name } });
      w.once('message', (ms) => { resolve(ms); void w.terminate(); });
      w.once('error', reject);
    })));
  const fmt = (ms) => ms.map((x) => x.toFixed(0)).join(', ');
  console.log('loop | alone (ms, twice) | side by side (ms, each thread) | slowest side by side / alone');
  for (const name of Object.keys(loops)) {
    const alone = [...(await run(name, 1)), ...(await run(name, 1))];
    const both = await run(name, 2);
    const ratio = Math.max(...both) / Math.min(...alone);
    console.log(`${name} | ${fmt(alone)} | ${fmt(both)} | ${ratio.toFixed(2)}`);
  }
}
