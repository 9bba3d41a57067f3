/**
 * apache-arrow, loaded from its single-file build: the package's default entry is some 150 ES modules, which
 * take about 0.24 s to load in every process and thread that writes or reads Arrow files; the bundled build
 * loads in about 0.07 s (measured with `node -e` on this project's machine). It holds the same classes and
 * functions; every module of kindred takes its Arrow values from here, so only one copy is ever loaded (class
 * identity matters to apache-arrow's own instanceof checks). Types still come from the package's declarations.
 */
import { createRequire } from 'node:module';
import type * as ArrowModule from 'apache-arrow';

const arrow = createRequire(import.meta.url)('apache-arrow/Arrow.esnext.min') as typeof ArrowModule;

export const {
  Field, Float32, Float64, Uint32, Utf8, Struct, FixedSizeList, Schema, RecordBatch, RecordBatchReader, RecordBatchFileWriter,
  Table, AsyncByteQueue, makeData, makeVector, vectorFromArray, tableFromIPC,
} = arrow;
