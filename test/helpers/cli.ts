/** Runs the compiled command line (dist/, built by `npm test`'s pretest step) in a child process. */
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import path from 'node:path';
import { repoRoot } from './python.js';

export const cliPath = path.join(repoRoot, 'dist', 'cli', 'main.js');

export interface CliResult {
  status: number | null;
  stdout: string;
  stderr: string;
}

export function runCli(args: string[], cwd = repoRoot): CliResult {
  if (!existsSync(cliPath)) throw new Error(`${cliPath} is missing: run "npm run build" first (npm test does it)`);
  const r = spawnSync(process.execPath, [cliPath, ...args], { cwd, encoding: 'utf8', env: { ...process.env, FORCE_COLOR: '0' } });
  return { status: r.status, stdout: r.stdout, stderr: r.stderr };
}
