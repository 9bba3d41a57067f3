import type { Manifest } from '../store/manifest.js';

function bytes(n: number): string {
  if (n >= 1 << 30) return `${(n / (1 << 30)).toFixed(2)} GiB`;
  if (n >= 1 << 20) return `${(n / (1 << 20)).toFixed(1)} MiB`;
  if (n >= 1 << 10) return `${(n / (1 << 10)).toFixed(1)} KiB`;
  return `${n} B`;
}

/** A human-readable summary of a build's manifest. */
export function describeBuild(dir: string, m: Manifest): string {
  const c = m.config;
  const lines: string[] = [];
  lines.push(`build       ${dir}`);
  lines.push(`created     ${m.createdAt} by kindred ${m.toolVersion} (format ${m.formatVersion})`);
  lines.push(`config      ${m.configFile} (hash ${m.configHash.slice(0, 16)})`);
  const inBytes = m.inputs.reduce((s, f) => s + f.bytes, 0);
  lines.push(`inputs      ${m.inputs.length} file(s), ${bytes(inBytes)}, ${m.ingest.documents} documents`);
  const binarySkipped = m.ingest.binaryFilesSkipped ?? 0;
  if (m.ingest.invalidUtf8Replaced || m.ingest.badRecordsSkipped || binarySkipped) {
    lines.push(`            ${m.ingest.invalidUtf8Replaced} invalid UTF-8 sequences replaced, ${m.ingest.badRecordsSkipped} bad records skipped, ${binarySkipped} binary files skipped`);
  }
  const ctx = c.contexts.type === 'document'
    ? 'per-document contexts'
    : `${c.contexts.direction} window ${c.contexts.window}, ${c.contexts.weighting} weighting`;
  lines.push(`contexts    ${ctx}`);
  const w = c.weighting;
  const scheme = w.scheme === 'tfidf' ? `tfidf (tf ${w.tf}, idf ${w.idf})` : w.scheme === 'ppmi' || w.scheme === 'pmi' ? `${w.scheme} (smoothing ${w.smoothing}, shift ${w.shift})` : w.scheme;
  lines.push(`weighting   ${scheme}, log base ${w.logBase}, ${c.normalize} rows, ${c.output.valueType}`);
  lines.push(`matrix      ${m.matrix.rows} terms x ${m.matrix.cols} ${m.matrix.columns}; ${m.matrix.countsEntries} counts, ${m.matrix.weightedEntries} weights`);
  lines.push(`parts       ${m.parts.length}: ${m.parts.map((p) => `[${p.firstRow},${p.endRow})`).join(' ')}`);
  if (m.vectors) {
    const v = m.vectors;
    lines.push(`vectors     ${v.rows} x ${v.dimensions}, U·Σ^${v.exponent}, σ₁ ${v.singularValues[0]?.toPrecision(6)}, ${(100 * v.energyCaptured).toFixed(1)}% of the squared norm (seed ${v.seed}, ${v.powerIterations} power iterations)`);
  }
  if (m.neighbors) {
    const n = m.neighbors;
    lines.push(`neighbors   ${n.measure} on ${n.source}, k ${n.k}, ${n.queried} terms, ${n.rows} rows (score = ${n.score})`);
  }
  lines.push(`stages      ${m.stages.map((s) => `${s.name} ${s.seconds.toFixed(2)}s`).join(', ')}`);
  const outBytes = m.files.reduce((s, f) => s + f.bytes, 0);
  lines.push(`files       ${m.files.length}, ${bytes(outBytes)}`);
  return lines.join('\n') + '\n';
}
