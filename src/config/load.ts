import { readFile } from 'node:fs/promises';
import path from 'node:path';
import { KindredError } from '../errors.js';
import { configHash } from './canonical.js';
import { findJsonProblem, lineColumn } from './jsonText.js';
import { applyOverride } from './override.js';
import type { KindredConfig } from './types.js';
import { validateConfig } from './validate.js';

export interface LoadedConfig {
  /** The resolved config: every key present, defaults filled, overrides applied. */
  config: KindredConfig;
  /** Absolute folder of the config file; input paths and stopwords resolve relative to it. */
  baseDir: string;
  /** Absolute path of the config file. */
  file: string;
  /** configHash(config): sha256 hex of the canonical JSON of the resolved config. */
  hash: string;
}

/** Parses config text; a syntax error or a duplicate key becomes a KindredError naming the file, line and column. */
export function parseConfigText(text: string, source: string): unknown {
  const body = text.charCodeAt(0) === 0xfeff ? text.slice(1) : text; // a byte-order mark is not JSON but editors write it
  let parsed: unknown;
  try {
    parsed = JSON.parse(body);
  } catch (e) {
    const problem = findJsonProblem(body);
    if (problem === null) throw new KindredError(`config ${source}: invalid JSON: ${(e as Error).message}; fix the file's syntax`);
    const { line, column } = lineColumn(body, problem.offset);
    throw new KindredError(`config ${source}: invalid JSON at line ${line}, column ${column}: ${problem.reason}`);
  }
  const problem = findJsonProblem(body);
  if (problem !== null) {
    if (!problem.reason.startsWith('duplicate key')) {
      throw new Error(`config ${source}: JSON scanner disagrees with JSON.parse at offset ${problem.offset}: ${problem.reason}`);
    }
    const { line, column } = lineColumn(body, problem.offset);
    throw new KindredError(`config ${source}: ${problem.reason} at line ${line}, column ${column}; keep one of them`);
  }
  return parsed;
}

/**
 * Reads a JSON config file, applies `--set key=value` overrides in order, validates against the shipped schema
 * and fills defaults. Every user-caused problem is a one-line KindredError naming the file (and line/column for
 * syntax errors) or the `--set` assignment.
 */
export async function loadConfig(file: string, overrides: string[]): Promise<LoadedConfig> {
  let text: string;
  try {
    text = await readFile(file, 'utf8');
  } catch (e) {
    const err = e as NodeJS.ErrnoException;
    const why = err.code === 'ENOENT' ? 'file not found' : err.code === 'EISDIR' ? 'is a directory, not a file' : `cannot read it (${err.code ?? err.message})`;
    throw new KindredError(`config ${file}: ${why}; check the path given for the config file`);
  }
  const parsed = parseConfigText(text, file);
  if (typeof parsed !== 'object' || parsed === null || Array.isArray(parsed)) {
    // validateConfig reports this; overrides need an object to write into.
    validateConfig(parsed, file);
  }
  const raw = parsed as Record<string, unknown>;
  for (const assignment of overrides) applyOverride(raw, assignment);
  const config = validateConfig(raw, file);
  const absolute = path.resolve(file);
  return { config, baseDir: path.dirname(absolute), file: absolute, hash: configHash(config) };
}
