import type { Command } from 'commander';
import { KindredError } from '../errors.js';
import { runAction } from './run.js';

export function registerVerify(program: Command): void {
  program
    .command('verify')
    .description('check a build against its manifest: checksums, Arrow schemas, row order and ranges, entry counts, vocabulary ids')
    .argument('<build-dir>', 'a folder written by "kindred build"')
    .option('--json', 'print the report as JSON')
    .action(
      runAction(async (dir: string, opts: { json?: boolean }) => {
        const { verifyBuild } = await import('../store/verify.js');
        const report = await verifyBuild(dir);
        if (opts.json) {
          process.stdout.write(JSON.stringify(report, null, 2) + '\n');
          if (!report.ok) process.exitCode = 1;
          return;
        }
        for (const p of report.problems) process.stdout.write(`${p.file}: ${p.message}\n`);
        const c = report.checked;
        if (!report.ok) {
          throw new KindredError(`${dir}: ${report.problems.length} problem(s) found; rebuild it (kindred build) or restore it from a copy`);
        }
        process.stdout.write(
          `${dir}: ok: ${c.files} files match their SHA-256 (${c.bytes} bytes); ${c.parts} parts, ${c.rows} terms, ` +
            `${c.countsEntries} counts and ${c.weightedEntries} weights in (row, col) order within their rows\n`,
        );
      }),
    );
}
