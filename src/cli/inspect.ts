import type { Command } from 'commander';
import { runAction } from './run.js';

export function registerInspect(program: Command): void {
  program
    .command('inspect')
    .description('show what a build holds, what it was built from and with which settings')
    .argument('<build-dir>', 'a folder written by "kindred build"')
    .option('--json', 'print the manifest as JSON')
    .action(
      runAction(async (dir: string, opts: { json?: boolean }) => {
        const { readManifest } = await import('../store/manifest.js');
        const { describeBuild } = await import('../query/describe.js');
        const manifest = readManifest(dir);
        process.stdout.write(opts.json ? JSON.stringify(manifest, null, 2) + '\n' : describeBuild(dir, manifest));
      }),
    );
}
