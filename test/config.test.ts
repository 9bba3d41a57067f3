import { readFileSync } from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { DEFAULT_CONFIG, validateConfig } from '../src/config/index.js';
import type {
  ContextsConfig,
  InputConfig,
  KindredConfig,
  NeighborsConfig,
  OutputConfig,
  TokenizeConfig,
  VectorsConfig,
  VocabularyConfig,
  WeightingConfig,
} from '../src/config/types.js';
import { SCHEMA_URL, parseSchema } from '../src/config/schema.js';
import { isKindredError } from '../src/errors.js';
import { fileURLToPath } from 'node:url';
import { repoRoot } from './helpers/python.js';

type Json = null | boolean | number | string | Json[] | { [k: string]: Json };
interface RawNode {
  type?: string;
  default?: Json;
  description?: string;
  properties?: Record<string, RawNode>;
  required?: string[];
  additionalProperties?: boolean;
  oneOf?: RawNode[];
  items?: RawNode;
}

const schemaFile = path.join(repoRoot, 'configs', 'kindred.schema.json');
const schemaText = readFileSync(schemaFile, 'utf8');
const schema = JSON.parse(schemaText) as RawNode & { $schema: string };

/** The message of the KindredError thrown by f (fails the test when f does not throw one). */
function messageOf(f: () => unknown): string {
  try {
    f();
  } catch (e) {
    if (!isKindredError(e)) throw e;
    return e.message;
  }
  throw new Error('expected a KindredError');
}

const minimal = (extra: Record<string, unknown> = {}): Record<string, unknown> => ({ input: { paths: ['corpus/a.txt'] }, ...extra });

// The defaults as listed in the configuration brief, typed in by hand: independent of the schema file.
const BRIEF_DEFAULTS: KindredConfig = {
  input: { paths: [], format: 'auto', textField: 'text', idField: null, onBadRecord: 'fail' },
  tokenize: { lowercase: true, minLength: 1, numbers: 'keep', numberPlaceholder: '<num>', stopwords: null },
  vocabulary: { minCount: 5, maxSize: 0, minDocFreq: 1 },
  contexts: { type: 'window', window: 5, direction: 'symmetric', weighting: 'uniform' },
  weighting: { scheme: 'ppmi', smoothing: 0.75, shift: 1, logBase: '2', tf: 'raw', idf: 'plain' },
  normalize: 'l2',
  output: { parts: 4, valueType: 'float32' },
  vectors: { enabled: false, dimensions: 100, exponent: 1, oversampling: 20, powerIterations: 4, seed: 1 },
  neighbors: { enabled: false, measure: 'cosine', k: 10, terms: 0, source: 'rows' },
  memoryMiB: 1024,
  workers: 0,
};

/** Reads `default` of every leaf straight from the schema JSON (a separate walk from the library's). */
function defaultsFromSchemaFile(node: RawNode): Record<string, Json> {
  const out: Record<string, Json> = {};
  for (const [k, child] of Object.entries(node.properties ?? {})) {
    if (child.properties) out[k] = defaultsFromSchemaFile(child);
    else if (child.default !== undefined) out[k] = child.default;
  }
  return out;
}

describe('schema file and defaults', () => {
  it('is draft 2020-12 and every object node forbids unknown keys', () => {
    expect(schema.$schema).toBe('https://json-schema.org/draft/2020-12/schema');
    const visit = (n: RawNode, where: string): void => {
      if (n.type === 'object') expect(n.additionalProperties, where).toBe(false);
      for (const [k, c] of Object.entries(n.properties ?? {})) visit(c, `${where}.${k}`);
    };
    visit(schema, '');
  });

  it('every key has a description and, except input.paths and $schema, a default', () => {
    const visit = (n: RawNode, where: string): void => {
      for (const [k, c] of Object.entries(n.properties ?? {})) {
        const p = where ? `${where}.${k}` : k;
        expect(c.description, p).toMatch(/\S/);
        const noDefault = p === 'input.paths' || p === '$schema' || p === 'input';
        if (!noDefault) expect(c.default, p).not.toBeUndefined();
        visit(c, p);
      }
    };
    visit(schema, '');
  });

  it('DEFAULT_CONFIG equals the defaults read from the schema file and the defaults of the brief', () => {
    const fromFile = defaultsFromSchemaFile(schema);
    expect(DEFAULT_CONFIG).toEqual({ ...fromFile, input: { ...(fromFile.input as object), paths: [] } });
    expect(DEFAULT_CONFIG).toEqual(BRIEF_DEFAULTS);
  });

  it('DEFAULT_CONFIG is frozen, so no caller can change the defaults of later builds', () => {
    expect(Object.isFrozen(DEFAULT_CONFIG)).toBe(true);
    expect(Object.isFrozen(DEFAULT_CONFIG.contexts)).toBe(true);
    expect(() => {
      (DEFAULT_CONFIG.contexts as { window: number }).window = 9;
    }).toThrow(TypeError);
  });

  it('schema keys are exactly the keys of the TypeScript config types', () => {
    // `satisfies` makes tsc fail when types.ts gains or loses a key; the expectation fails when the schema does.
    const keys = {
      top: { input: 1, tokenize: 1, vocabulary: 1, contexts: 1, weighting: 1, normalize: 1, output: 1, vectors: 1, neighbors: 1, memoryMiB: 1, workers: 1 } satisfies Record<keyof KindredConfig, 1>,
      input: { paths: 1, format: 1, textField: 1, idField: 1, onBadRecord: 1 } satisfies Record<keyof InputConfig, 1>,
      tokenize: { lowercase: 1, minLength: 1, numbers: 1, numberPlaceholder: 1, stopwords: 1 } satisfies Record<keyof TokenizeConfig, 1>,
      vocabulary: { minCount: 1, maxSize: 1, minDocFreq: 1 } satisfies Record<keyof VocabularyConfig, 1>,
      contexts: { type: 1, window: 1, direction: 1, weighting: 1 } satisfies Record<keyof ContextsConfig, 1>,
      weighting: { scheme: 1, smoothing: 1, shift: 1, logBase: 1, tf: 1, idf: 1 } satisfies Record<keyof WeightingConfig, 1>,
      output: { parts: 1, valueType: 1 } satisfies Record<keyof OutputConfig, 1>,
      vectors: { enabled: 1, dimensions: 1, exponent: 1, oversampling: 1, powerIterations: 1, seed: 1 } satisfies Record<keyof VectorsConfig, 1>,
      neighbors: { enabled: 1, measure: 1, k: 1, terms: 1, source: 1 } satisfies Record<keyof NeighborsConfig, 1>,
    };
    const props = schema.properties ?? {};
    expect(Object.keys(props).filter((k) => k !== '$schema').sort()).toEqual(Object.keys(keys.top).sort());
    for (const section of ['input', 'tokenize', 'vocabulary', 'contexts', 'weighting', 'output', 'vectors', 'neighbors'] as const) {
      expect(Object.keys(props[section].properties ?? {}).sort(), section).toEqual(Object.keys(keys[section]).sort());
    }
  });

  it('the library reads the shipped schema file (same depth from src/config and dist/config)', () => {
    expect(fileURLToPath(SCHEMA_URL)).toBe(schemaFile);
  });

  it('the validator refuses a schema keyword it does not interpret, instead of ignoring it', () => {
    expect(() => parseSchema(schema)).not.toThrow();
    const withPattern = structuredClone(schema);
    (withPattern.properties!.input.properties!.textField as Record<string, unknown>).pattern = '^[a-z]+$';
    expect(() => parseSchema(withPattern)).toThrow('config schema #/properties/input/properties/textField: keyword "pattern" is not supported');
  });

  it('docs/config.md lists every key with the default of the schema', () => {
    const doc = readFileSync(path.join(repoRoot, 'docs', 'config.md'), 'utf8');
    const visit = (n: RawNode, where: string): void => {
      for (const [k, c] of Object.entries(n.properties ?? {})) {
        const p = where ? `${where}.${k}` : k;
        if (c.properties) {
          visit(c, p);
          continue;
        }
        const row = doc.split('\n').find((line) => line.startsWith(`| \`${p}\` |`));
        expect(row, `docs/config.md row for ${p}`).toBeDefined();
        const defaultCell = row!.split('|')[3].trim();
        if (c.default !== undefined) expect(defaultCell, p).toBe(`\`${JSON.stringify(c.default)}\``);
      }
    };
    visit(schema, '');
  });

  it('the schema defaults pass the validator', () => {
    const cfg = validateConfig({ ...structuredClone(DEFAULT_CONFIG), input: { ...DEFAULT_CONFIG.input, paths: ['x'] } }, 'defaults');
    expect(cfg).toEqual({ ...BRIEF_DEFAULTS, input: { ...BRIEF_DEFAULTS.input, paths: ['x'] } });
  });
});

describe('validateConfig fills defaults', () => {
  it('a config naming only input.paths gets every default', () => {
    expect(validateConfig(minimal(), 'x.json')).toEqual({ ...BRIEF_DEFAULTS, input: { ...BRIEF_DEFAULTS.input, paths: ['corpus/a.txt'] } });
  });

  it('a partial section keeps its given keys and fills the rest', () => {
    const cfg = validateConfig(minimal({ contexts: { window: 2 }, weighting: { scheme: 'pmi', logBase: 'e' } }), 'x.json');
    expect(cfg.contexts).toEqual({ type: 'window', window: 2, direction: 'symmetric', weighting: 'uniform' });
    expect(cfg.weighting).toEqual({ scheme: 'pmi', smoothing: 0.75, shift: 1, logBase: 'e', tf: 'raw', idf: 'plain' });
  });

  it('does not change its input and does not share default objects between results', () => {
    const raw = minimal();
    const before = structuredClone(raw);
    const a = validateConfig(raw, 'x.json');
    const b = validateConfig(raw, 'x.json');
    expect(raw).toEqual(before);
    a.input.paths.push('other');
    expect(b.input.paths).toEqual(['corpus/a.txt']);
    expect(DEFAULT_CONFIG.input.paths).toEqual([]);
  });

  it('allows and drops a top-level "$schema"', () => {
    const cfg = validateConfig(minimal({ $schema: '../configs/kindred.schema.json' }), 'x.json');
    expect(Object.keys(cfg)).not.toContain('$schema');
    expect(messageOf(() => validateConfig(minimal({ $schema: 3 }), 'x.json'))).toBe('config x.json: $schema: 3 is not a string');
  });

  it('accepts the range ends and nulls', () => {
    const cfg = validateConfig(
      minimal({
        contexts: { window: 100 },
        weighting: { smoothing: 2, shift: 1 },
        output: { parts: 4096 },
        memoryMiB: 16,
        vocabulary: { maxSize: 0 },
        tokenize: { stopwords: 'stop.txt' },
      }),
      'x.json',
    );
    expect([cfg.contexts.window, cfg.weighting.smoothing, cfg.output.parts, cfg.memoryMiB, cfg.tokenize.stopwords]).toEqual([100, 2, 4096, 16, 'stop.txt']);
    expect(validateConfig(minimal({ weighting: { smoothing: 1e-9 } }), 'x.json').weighting.smoothing).toBe(1e-9);
  });
});

describe('validateConfig error messages (one line each, exact)', () => {
  const cases: Array<[string, Record<string, unknown>, string]> = [
    ['enum', minimal({ weighting: { scheme: 'ppmi2' } }), 'weighting.scheme: "ppmi2" is not one of ppmi, pmi, observed-expected, ttest, log-count, tfidf'],
    ['minimum', minimal({ contexts: { window: 0 } }), 'contexts.window: 0 is below the minimum 1'],
    ['maximum', minimal({ output: { parts: 5000 } }), 'output.parts: 5000 is above the maximum 4096'],
    ['window maximum', minimal({ contexts: { window: 101 } }), 'contexts.window: 101 is above the maximum 100'],
    ['exclusive minimum', minimal({ weighting: { smoothing: 0 } }), 'weighting.smoothing: 0 is not above the exclusive minimum 0'],
    ['smoothing maximum', minimal({ weighting: { smoothing: 2.5 } }), 'weighting.smoothing: 2.5 is above the maximum 2'],
    ['shift minimum', minimal({ weighting: { shift: 0.5 } }), 'weighting.shift: 0.5 is below the minimum 1'],
    ['memory minimum', minimal({ memoryMiB: 8 }), 'memoryMiB: 8 is below the minimum 16'],
    ['integer', minimal({ contexts: { window: 2.5 } }), 'contexts.window: 2.5 is not an integer'],
    ['integer given as string', minimal({ vocabulary: { minCount: '5' } }), 'vocabulary.minCount: "5" is not an integer'],
    ['boolean', minimal({ tokenize: { lowercase: 'yes' } }), 'tokenize.lowercase: "yes" is not a boolean'],
    ['number', minimal({ weighting: { shift: '2' } }), 'weighting.shift: "2" is not a number'],
    ['section not an object', minimal({ contexts: 5 }), 'contexts: 5 is not an object'],
    ['enum as a number', minimal({ weighting: { logBase: 2 } }), 'weighting.logBase: 2 is not one of 2, e, 10 (write it as the string "2")'],
    ['string or null', minimal({ input: { paths: ['a'], idField: 3 } }), 'input.idField: 3 is not a string or null'],
    ['empty string in string-or-null', minimal({ tokenize: { stopwords: '' } }), 'tokenize.stopwords: "" must not be empty'],
    ['empty string', minimal({ input: { paths: ['a'], textField: '' } }), 'input.textField: "" must not be empty'],
    ['empty paths', { input: { paths: [] } }, 'input.paths: [] must have at least 1 item'],
    ['paths not an array', { input: { paths: 'a.txt' } }, 'input.paths: "a.txt" is not an array'],
    ['path not a string', { input: { paths: ['a', 7] } }, 'input.paths[1]: 7 is not a string'],
    ['missing paths', { input: { format: 'jsonl' } }, 'missing required key "input.paths"'],
    ['missing input', {}, 'missing required key "input"'],
    [
      'unknown key with a suggestion',
      minimal({ contexts: { windw: 3 } }),
      'unknown key "contexts.windw" (allowed: type, window, direction, weighting), did you mean "window"?',
    ],
    ['unknown key, case slip', minimal({ tokenize: { minlength: 2 } }), 'unknown key "tokenize.minlength" (allowed: lowercase, minLength, numbers, numberPlaceholder, stopwords), did you mean "minLength"?'],
    ['unknown key without a suggestion', minimal({ contexts: { breadth: 3 } }), 'unknown key "contexts.breadth" (allowed: type, window, direction, weighting)'],
    [
      'unknown key that lives in another section',
      minimal({ contexts: { scheme: 'ppmi' } }),
      'unknown key "contexts.scheme" (allowed: type, window, direction, weighting), did you mean "weighting.scheme"?',
    ],
    [
      'unknown top-level key',
      minimal({ contxts: {} }),
      'unknown key "contxts" (allowed: $schema, input, tokenize, vocabulary, contexts, weighting, normalize, output, vectors, neighbors, memoryMiB, workers), did you mean "contexts"?',
    ],
    [
      'cross-key: tfidf needs document contexts',
      minimal({ weighting: { scheme: 'tfidf' } }),
      'weighting.scheme "tfidf" requires contexts.type "document", found contexts.type "window"; set contexts.type to "document" or choose another weighting.scheme',
    ],
    [
      'cross-key: a neighbour table on vectors needs vectors',
      minimal({ neighbors: { enabled: true, source: 'vectors' } }),
      'neighbors.source "vectors" requires vectors.enabled true; set vectors.enabled to true or neighbors.source to "rows"',
    ],
    ['neighbour measure names', minimal({ neighbors: { measure: 'cos' } }), 'neighbors.measure: "cos" is not one of euclidean, manhattan, cosine, kl, js, jaccard, dice, overlap, matching'],
    ['vector exponent range', minimal({ vectors: { exponent: 3 } }), 'vectors.exponent: 3 is above the maximum 2'],
  ];
  for (const [name, raw, expected] of cases) {
    it(name, () => {
      const message = messageOf(() => validateConfig(raw, 'configs/x.json'));
      expect(message).toBe(`config configs/x.json: ${expected}`);
      expect(message).not.toContain('\n');
    });
  }

  it('reports every problem, joined with "; " on one line, in schema order', () => {
    const raw = { input: { paths: [] }, contexts: { window: 0, windw: 1 }, weighting: { scheme: 'x' } };
    expect(messageOf(() => validateConfig(raw, 'x.json'))).toBe(
      'config x.json: input.paths: [] must have at least 1 item; ' +
        'unknown key "contexts.windw" (allowed: type, window, direction, weighting), did you mean "window"?; ' +
        'contexts.window: 0 is below the minimum 1; ' +
        'weighting.scheme: "x" is not one of ppmi, pmi, observed-expected, ttest, log-count, tfidf',
    );
  });

  it('top level that is not an object', () => {
    expect(messageOf(() => validateConfig(['a'], 'x.json'))).toBe('config x.json: the top level must be an object, found ["a"]');
    expect(messageOf(() => validateConfig(null, 'x.json'))).toBe('config x.json: the top level must be an object, found null');
  });

  it('long bad values are shortened so the message stays readable', () => {
    const message = messageOf(() => validateConfig(minimal({ normalize: 'x'.repeat(500) }), 'x.json'));
    expect(message.length).toBeLessThan(200);
    expect(message).toMatch(/^config x\.json: normalize: "x+\.\.\. is not one of l2, l1, none$/);
  });

  it('tfidf with document contexts is valid, and the window setting is then irrelevant but allowed', () => {
    const cfg = validateConfig(minimal({ weighting: { scheme: 'tfidf', tf: 'log', idf: 'smooth' }, contexts: { type: 'document', window: 100 } }), 'x.json');
    expect(cfg.weighting.scheme).toBe('tfidf');
    expect(cfg.contexts).toEqual({ type: 'document', window: 100, direction: 'symmetric', weighting: 'uniform' });
  });
});
