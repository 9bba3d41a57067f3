import type { Command } from 'commander';
import { loadConfig } from '../config/index.js';
import { runBuild } from '../build.js';
import { StreamProgress } from '../progress.js';
import { runAction } from './run.js';

function collect(value: string, previous: string[]): string[] {
  return [...previous, value];
}

export function registerBuild(program: Command): void {
  program
    .command('build')
    .description('build the vocabulary, co-occurrence counts and weighted matrix described by a config file')
    .argument('<config>', 'JSON config file (schema: configs/kindred.schema.json)')
    .option('--out <dir>', 'output folder (replaced only when the new build succeeds)', 'out/build')
    .option('--set <key=value>', 'override a config key, e.g. --set contexts.window=2 (repeatable)', collect, [])
    .action(
      runAction(async (configFile: string, opts: { out: string; set: string[] }) => {
        const loaded = await loadConfig(configFile, opts.set);
        const manifest = await runBuild(loaded, { outDir: opts.out, progress: new StreamProgress(process.stderr) });
        const m = manifest.matrix;
        process.stdout.write(`built ${opts.out}: ${m.rows} terms x ${m.cols} ${m.columns}, ${m.weightedEntries} weights (config ${manifest.configHash.slice(0, 12)})\n`);
      }),
    );
}
