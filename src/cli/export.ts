import { promises as fsp } from 'node:fs';
import path from 'node:path';
import type { Writable } from 'node:stream';
import type { Command } from 'commander';
import { KindredError } from '../errors.js';
import type { ExportFormat, ExportTable } from '../query/export.js';
import { temporarySibling, wrapWriteError } from '../store/atomic.js';
import { runAction } from './run.js';

function collect(value: string, previous: string[]): string[] {
  return [...previous, value];
}

interface ExportCliOptions {
  format: string;
  out?: string;
  minScore?: string;
  term: string[];
  termsFile?: string;
  dryRun?: boolean;
}

async function readTermsFile(file: string): Promise<string[]> {
  let text: string;
  try {
    text = await fsp.readFile(file, 'utf8');
  } catch (e) {
    throw new KindredError(`--terms-file ${file}: ${(e as NodeJS.ErrnoException).code === 'ENOENT' ? 'file not found' : String((e as Error).message)}`);
  }
  return text.split(/\r?\n/).map((l) => l.trim()).filter((l) => l !== '' && !l.startsWith('#'));
}

function closeStream(stream: Writable): Promise<void> {
  return new Promise((resolve, reject) => {
    stream.once('error', reject);
    stream.end(() => resolve());
  });
}

export function registerExport(program: Command): void {
  program
    .command('export')
    .description("write a build's neighbour table or vectors as JSON Lines or CSV, streaming")
    .argument('<build-dir>', 'a folder written by "kindred build"')
    .argument('<table>', 'neighbors or vectors')
    .option('--format <format>', 'jsonl or csv', 'jsonl')
    .option('--out <file>', 'output file (written to a temporary name, renamed when complete); default: standard output')
    .option('--min-score <x>', 'neighbour tables: leave out rows whose score is below x (score: higher is closer)')
    .option('--term <term>', 'export only this term (repeatable); neighbour tables filter on the listed term', collect, [])
    .option('--terms-file <file>', 'export only the terms in this file, one per line (# starts a comment)')
    .option('--dry-run', 'count the rows and terms that would be exported; write nothing')
    .addHelpText('after', '\nCaution: exported related-term data reproduces the corpus, personal data included; review it before it ships.')
    .action(
      runAction(async (dir: string, table: string, opts: ExportCliOptions) => {
        if (table !== 'neighbors' && table !== 'vectors') throw new KindredError(`table "${table}" is not one of neighbors, vectors`);
        if (opts.format !== 'jsonl' && opts.format !== 'csv') throw new KindredError(`--format: "${opts.format}" is not one of jsonl, csv`);
        let minScore: number | undefined;
        if (opts.minScore !== undefined) {
          minScore = Number(opts.minScore);
          if (opts.minScore.trim() === '' || !Number.isFinite(minScore)) throw new KindredError(`--min-score: "${opts.minScore}" is not a number`);
        }
        const terms = [...opts.term, ...(opts.termsFile ? await readTermsFile(opts.termsFile) : [])];
        const filtered = opts.term.length > 0 || opts.termsFile !== undefined;
        const settings = { table: table as ExportTable, format: opts.format as ExportFormat, minScore, terms: filtered ? terms : undefined, dryRun: opts.dryRun };

        const { exportTable } = await import('../query/export.js');
        let summary;
        if (opts.out && !opts.dryRun) {
          const target = path.resolve(opts.out);
          const tmp = temporarySibling(target, 'export');
          let stream: Writable | null = null;
          try {
            // open first, so a missing folder or a permission problem is reported before any work
            const handle = await fsp.open(tmp, 'w');
            const file = handle.createWriteStream();
            stream = file;
            summary = await exportTable(dir, settings, file);
            await closeStream(file);
            await fsp.rename(tmp, target);
          } catch (e) {
            stream?.destroy();
            await fsp.rm(tmp, { force: true });
            throw wrapWriteError(e, target);
          }
        } else {
          // a closed pipe (e.g. `| head`) ends the export quietly
          process.stdout.on('error', (e: NodeJS.ErrnoException) => {
            if (e.code === 'EPIPE') process.exit(0);
          });
          summary = await exportTable(dir, settings, process.stdout);
        }
        const where = opts.dryRun ? 'would export' : `exported`;
        process.stderr.write(`kindred: ${where} ${summary.rows} rows for ${summary.terms} terms${opts.out && !opts.dryRun ? ` to ${opts.out}` : ''}\n`);
        if (summary.missingTerms.length > 0) {
          const shown = summary.missingTerms.slice(0, 10).join(', ');
          process.stderr.write(`kindred: ${summary.missingTerms.length} requested term(s) have no row: ${shown}${summary.missingTerms.length > 10 ? ', …' : ''}\n`);
        }
      }),
    );
}
