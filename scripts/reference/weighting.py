"""Reweighting schemes and row normalization with numpy/scipy: the outside reference for src/weight/.

Written independently of the TypeScript code, vectorised over the stored entries of a CSR matrix.
Formulas and sources: docs/weighting.md.
"""
import numpy as np
import scipy.sparse as sp

LOG = {'2': np.log2, 'e': np.log, '10': np.log10}


def clean_csr(X):
    """CSR float64 copy with duplicates summed, explicit zeros removed and indices sorted."""
    X = sp.csr_matrix(X, dtype=np.float64, copy=True)
    X.sum_duplicates()
    X.eliminate_zeros()
    X.sort_indices()
    return X


def marginals(X):
    """Row sums, column sums, total and stored nonzeros per row of a clean CSR matrix."""
    row_sums = np.asarray(X.sum(axis=1)).ravel()
    col_sums = np.asarray(X.sum(axis=0)).ravel()
    total = float(row_sums.sum())
    row_nnz = np.diff(X.indptr)
    return row_sums, col_sums, total, row_nnz


def context_probabilities(col_sums, total, alpha):
    """P_alpha(c) = colSums^alpha / sum colSums^alpha; alpha = 1 is colSums / total (Levy, Goldberg & Dagan 2015)."""
    if alpha == 1:
        return col_sums / total
    powered = np.power(col_sums, alpha)
    return powered / powered.sum()


def weight(X, w):
    """Weights the stored entries of X with scheme w['scheme'] and drops entries whose weight is exactly 0."""
    X = clean_csr(X)
    n_rows, n_cols = X.shape
    row_sums, col_sums, total, row_nnz = marginals(X)
    rows = np.repeat(np.arange(n_rows), np.diff(X.indptr))
    cols = X.indices
    n = X.data
    log = LOG[w['logBase']]
    scheme = w['scheme']
    if scheme in ('ppmi', 'pmi'):
        pc = context_probabilities(col_sums, total, float(w['smoothing']))
        pw = row_sums / total
        # PMI = log(P(w,c) / (P(w) P_alpha(c))) - log k (Church & Hanks 1990; Levy & Goldberg 2014 for the shift)
        vals = log((n / total) / (pw[rows] * pc[cols])) - log(float(w['shift']))
        if scheme == 'ppmi':
            vals = np.maximum(vals, 0.0)  # Bullinaria & Levy 2007
    elif scheme == 'observed-expected':
        # O / E with E = R_w C_c / N (Evert 2005)
        vals = n / (row_sums[rows] * col_sums[cols] / total)
    elif scheme == 'ttest':
        # (P(w,c) - P(w)P(c)) / sqrt(P(w)P(c)) (Curran & Moens 2002)
        e = (row_sums[rows] / total) * (col_sums[cols] / total)
        vals = (n / total - e) / np.sqrt(e)
    elif scheme == 'log-count':
        vals = log(1.0 + n)
    elif scheme == 'tfidf':
        n_docs = n_cols
        df = row_nnz[rows].astype(np.float64)
        # Salton & Buckley 1988; Sparck Jones 1972
        tf = n if w['tf'] == 'raw' else 1.0 + log(n)
        idf = log(n_docs / df) if w['idf'] == 'plain' else log((1.0 + n_docs) / (1.0 + df)) + 1.0
        vals = tf * idf
    else:
        raise ValueError('unknown scheme %r' % scheme)
    W = sp.csr_matrix((vals, X.indices.copy(), X.indptr.copy()), shape=X.shape)
    W.eliminate_zeros()
    return W


def normalize(W, kind):
    """Scales rows to unit L2 or L1 norm; rows with norm 0 stay as they are."""
    if kind == 'none':
        return W
    if kind == 'l2':
        norms = np.sqrt(np.asarray(W.multiply(W).sum(axis=1)).ravel())
    elif kind == 'l1':
        norms = np.asarray(abs(W).sum(axis=1)).ravel()
    else:
        raise ValueError('unknown normalization %r' % kind)
    norms = np.where(norms > 0, norms, 1.0)
    W = W.copy()
    W.data = W.data / np.repeat(norms, np.diff(W.indptr))
    return W
