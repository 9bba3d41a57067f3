#!/usr/bin/env node
import { Command } from 'commander';
import { TOOL_VERSION } from '../version.js';
import { registerBuild } from './build.js';
import { registerNeighbors } from './neighbors.js';
import { registerInspect } from './inspect.js';
import { registerVerify } from './verify.js';
import { registerServe } from './serve.js';
import { registerExport } from './export.js';

const program = new Command();
program
  .name('kindred')
  .description('Turn text corpora into reweighted word-by-context matrices and neighbour tables.')
  .version(TOOL_VERSION)
  .addHelpText(
    'after',
    '\nCaution: co-occurrence data reproduces the corpus, its biases and any personal data in it (names, e-mail\n' +
      'addresses, account numbers become vocabulary). Use vocabulary.minDocFreq and stopword/term filters, and\n' +
      'review related-term data before it feeds a live search service.',
  );
registerBuild(program);
registerNeighbors(program);
registerInspect(program);
registerVerify(program);
registerServe(program);
registerExport(program);
await program.parseAsync(process.argv);
