import { spawnSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { DEFAULT_CONFIG, canonicalJson, configHash, validateConfig } from '../src/config/index.js';
import type { KindredConfig } from '../src/config/types.js';
import { pythonAvailable, runPython, runPythonJson } from './helpers/python.js';

const hasSha256sum = spawnSync('sha256sum', ['--version']).status === 0;
const resolve = (raw: unknown): KindredConfig => validateConfig(raw, 'x.json');

describe('canonicalJson', () => {
  it('sorts keys recursively, keeps array order, writes no whitespace', () => {
    expect(canonicalJson({ b: 1, a: { d: [3, 1, { z: true, y: null }], c: 'x' } })).toBe('{"a":{"c":"x","d":[3,1,{"y":null,"z":true}]},"b":1}');
  });

  it('sorts by UTF-16 code units ("Z" before "a", "$" first) and drops undefined values', () => {
    expect(canonicalJson({ a: 1, Z: 2, $s: 3, u: undefined })).toBe('{"$s":3,"Z":2,"a":1}');
  });

  it('writes numbers and strings as JSON.stringify does', () => {
    expect(canonicalJson([0.75, 1e21, -0, 'caf\u00e9 "q"\n'])).toBe('[0.75,1e+21,0,"caf\u00e9 \\"q\\"\\n"]');
  });

  it('refuses values JSON cannot hold', () => {
    expect(() => canonicalJson(NaN)).toThrow(TypeError);
    expect(() => canonicalJson({ a: Infinity })).toThrow(TypeError);
    expect(() => canonicalJson(10n)).toThrow(TypeError);
  });
});

describe('configHash', () => {
  const minimal = { input: { paths: ['corpus/a.txt'] }, contexts: { window: 3 } };

  it('does not depend on key order in the file', () => {
    const reordered = { contexts: { window: 3 }, input: { paths: ['corpus/a.txt'] } };
    expect(configHash(resolve(reordered))).toBe(configHash(resolve(minimal)));
  });

  it('does not change when a default is written out', () => {
    const explicit = {
      input: { paths: ['corpus/a.txt'], format: 'auto', idField: null },
      contexts: { window: 3, type: 'window' },
      weighting: { smoothing: 0.75, logBase: '2' },
      memoryMiB: 1024,
      $schema: '../configs/kindred.schema.json',
    };
    expect(configHash(resolve(explicit))).toBe(configHash(resolve(minimal)));
  });

  it('changes when any setting changes, including array order', () => {
    const h = configHash(resolve(minimal));
    expect(configHash(resolve({ ...minimal, contexts: { window: 4 } }))).not.toBe(h);
    expect(configHash(resolve({ ...minimal, weighting: { smoothing: 1 } }))).not.toBe(h);
    const two = configHash(resolve({ input: { paths: ['a', 'b'] } }));
    expect(configHash(resolve({ input: { paths: ['b', 'a'] } }))).not.toBe(two);
  });

  it('is pinned for the default settings, so an accidental change of defaults or of canonical form is noticed', () => {
    const text = canonicalJson({ ...DEFAULT_CONFIG, input: { ...DEFAULT_CONFIG.input, paths: ['a.txt'] } });
    expect(text).toBe(
      '{"contexts":{"direction":"symmetric","type":"window","weighting":"uniform","window":5},' +
        '"input":{"format":"auto","idField":null,"onBadRecord":"fail","paths":["a.txt"],"textField":"text"},' +
        '"memoryMiB":1024,"neighbors":{"enabled":false,"k":10,"measure":"cosine","source":"rows","terms":0},' +
        '"normalize":"l2","output":{"parts":4,"valueType":"float32"},' +
        '"tokenize":{"lowercase":true,"minLength":1,"numberPlaceholder":"<num>","numbers":"keep","stopwords":null},' +
        '"vectors":{"dimensions":100,"enabled":false,"exponent":1,"oversampling":20,"powerIterations":4,"seed":1},' +
        '"vocabulary":{"maxSize":0,"minCount":5,"minDocFreq":1},' +
        '"weighting":{"idf":"plain","logBase":"2","scheme":"ppmi","shift":1,"smoothing":0.75,"tf":"raw"},"workers":0}',
    );
  });

  it.skipIf(!hasSha256sum && process.env.CI !== 'true')('sha256 agrees with the coreutils sha256sum program', () => {
    // Reference: GNU coreutils sha256sum over the canonical JSON bytes.
    const cfg = resolve({ input: { paths: ['caf\u00e9/*.jsonl'] }, tokenize: { stopwords: 'stop.txt' } });
    const r = spawnSync('sha256sum', [], { input: canonicalJson(cfg), encoding: 'utf8' });
    expect(r.status).toBe(0);
    expect(configHash(cfg)).toBe(r.stdout.split(' ')[0]);
  });

  it.skipIf(!pythonAvailable())('canonical form and hash agree with python json.dumps(sort_keys=True) and hashlib.sha256', () => {
    // Reference: python3 json (sort_keys, compact separators, ensure_ascii=False) + hashlib, fed the config in its ORIGINAL key order.
    const configs = [
      resolve(minimal),
      resolve({ input: { paths: ['caf\u00e9/*.jsonl', 'b "q".txt'], idField: 'meta.id' }, weighting: { scheme: 'pmi', smoothing: 0.5, shift: 5 }, normalize: 'none' }),
    ];
    const py = runPythonJson<Array<{ text: string; hash: string }>>(
      [
        '-c',
        'import json,sys,hashlib\nout=[]\nfor c in json.load(sys.stdin):\n  t=json.dumps(c,sort_keys=True,separators=(",",":"),ensure_ascii=False)\n  out.append({"text":t,"hash":hashlib.sha256(t.encode("utf-8")).hexdigest()})\nprint(json.dumps(out))',
      ],
      configs,
    );
    expect(py.map((p) => p.text)).toEqual(configs.map(canonicalJson));
    expect(py.map((p) => p.hash)).toEqual(configs.map(configHash));
    // The hash of our canonical text as bytes, computed by python alone.
    const text = canonicalJson(configs[0]);
    expect(runPython(['-c', 'import sys,hashlib;print(hashlib.sha256(sys.stdin.buffer.read()).hexdigest())'], { input: Buffer.from(text, 'utf8') }).trim()).toBe(configHash(configs[0]));
  });
});
