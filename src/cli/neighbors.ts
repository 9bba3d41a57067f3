import type { Command } from 'commander';
import { KindredError } from '../errors.js';
import { getMeasure, MEASURE_NAMES } from '../measures/index.js';
import { runAction } from './run.js';

function positiveInt(value: string): number {
  const n = Number(value);
  if (!Number.isInteger(n) || n < 1) throw new KindredError(`--k: "${value}" is not a whole number of at least 1`);
  return n;
}

export function registerNeighbors(program: Command): void {
  program
    .command('neighbors')
    .description('list the nearest terms to a term in a build, by an exact scan of the weighted rows')
    .argument('<build-dir>', 'a folder written by "kindred build"')
    .argument('<term>', 'the query term')
    .option('--measure <name>', `distance measure: ${MEASURE_NAMES.join(', ')}`, 'cosine')
    .option('--k <n>', 'how many neighbours', '10')
    .option('--json', 'print a JSON array of {rank, neighbor, distance}')
    .action(
      runAction(async (dir: string, term: string, opts: { measure: string; k: string; json?: boolean }) => {
        getMeasure(opts.measure);
        const k = positiveInt(opts.k);
        const { findNeighbors, loadBuild } = await import('../query/neighbors.js');
        const build = loadBuild(dir);
        const result = findNeighbors(build, term, opts.measure, k);
        if (opts.json) {
          process.stdout.write(JSON.stringify(result, null, 2) + '\n');
          return;
        }
        const width = Math.max(8, ...result.map((r) => r.neighbor.length));
        process.stdout.write(`${'rank'.padStart(4)}  ${'neighbor'.padEnd(width)}  ${opts.measure} distance\n`);
        for (const r of result) process.stdout.write(`${String(r.rank).padStart(4)}  ${r.neighbor.padEnd(width)}  ${r.distance.toFixed(6)}\n`);
      }),
    );
}
