#!/usr/bin/env python3
"""Weights small matrices given as JSON on stdin with the numpy/scipy reference (weighting.py); JSON on stdout.

Input:  {"cases": [{"nRows", "nCols", "rows", "cols", "values", "weighting": {...}, "normalize": "l2"|"l1"|"none"}]}
Output: [{"rows", "cols", "values", "rowSums", "colSums", "total", "rowNnz"}] with entries sorted by (row, col).
"""
import json
import os
import sys

import numpy as np
import scipy.sparse as sp

sys.dont_write_bytecode = True  # keep the repository free of __pycache__
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from weighting import clean_csr, marginals, normalize, weight  # noqa: E402


def run_case(case):
    X = sp.coo_matrix(
        (np.asarray(case['values'], dtype=np.float64), (np.asarray(case['rows']), np.asarray(case['cols']))),
        shape=(case['nRows'], case['nCols']),
    )
    X = clean_csr(X)
    row_sums, col_sums, total, row_nnz = marginals(X)
    W = normalize(weight(X, case['weighting']), case['normalize'])
    W.sort_indices()
    coo = W.tocoo()
    return {
        'rows': coo.row.tolist(),
        'cols': coo.col.tolist(),
        'values': coo.data.tolist(),
        'rowSums': row_sums.tolist(),
        'colSums': col_sums.tolist(),
        'total': total,
        'rowNnz': row_nnz.tolist(),
    }


def main():
    req = json.load(sys.stdin)
    json.dump([run_case(c) for c in req['cases']], sys.stdout)


if __name__ == '__main__':
    main()
