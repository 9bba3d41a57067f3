import type { Command } from 'commander';
import { readManifest } from '../store/manifest.js';
import { describeBuild } from '../query/describe.js';
import { runAction } from './run.js';

export function registerInspect(program: Command): void {
  program
    .command('inspect')
    .description('show what a build holds, what it was built from and with which settings')
    .argument('<build-dir>', 'a folder written by "kindred build"')
    .option('--json', 'print the manifest as JSON')
    .action(
      runAction(async (dir: string, opts: { json?: boolean }) => {
        const manifest = readManifest(dir);
        process.stdout.write(opts.json ? JSON.stringify(manifest, null, 2) + '\n' : describeBuild(dir, manifest));
      }),
    );
}
