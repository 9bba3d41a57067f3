#!/usr/bin/env python3
"""Reference build with numpy/scipy: plain text (one document per line) to counts and weighted matrices.

An independent implementation of kindred's build semantics (scripts/reference/README.md), used to check
kindred's output and as the baseline of the speed benchmark. Vectorised: the only Python loops over
tokens are in tokenizing and in mapping token strings to ids.

  python3 scripts/reference/pipeline.py --input docs.txt --config resolved.json --out DIR

Writes DIR/vocab.txt (terms in id order), DIR/vocab-stats.tsv (id, term, count, doc_freq),
DIR/counts.bin and DIR/weighted.bin (little-endian: int64 nnz, int32 rows[nnz], int32 cols[nnz],
float64 values[nnz], sorted by (row, col)) and DIR/meta.json (shape and corpus sizes).
"""
import argparse
from array import array
import json
import math
import os
import re
import sys
import time
import unicodedata

import numpy as np
import scipy.sparse as sp

sys.dont_write_bytecode = True  # keep the repository free of __pycache__
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from weighting import normalize, weight  # noqa: E402

# ---------------------------------------------------------------- tokenizer


def _category_class(categories):
    """A regex character class of every code point whose Unicode general category is in `categories`."""
    category = unicodedata.category
    ok = np.fromiter((category(c) in categories for c in map(chr, range(0x110000))), dtype=bool, count=0x110000)
    edges = np.flatnonzero(np.diff(np.concatenate(([False], ok, [False])).astype(np.int8)))
    starts, ends = edges[0::2], edges[1::2] - 1

    def esc(cp):
        return '\\U%08x' % cp

    return '[' + ''.join(esc(a) if a == b else esc(a) + '-' + esc(b) for a, b in zip(starts, ends)) + ']'


_WORD_CHAR = None
_DIGIT = None


def _classes():
    global _WORD_CHAR, _DIGIT
    if _WORD_CHAR is None:
        # Letters (L*), marks (M*) and decimal digits (Nd): exact from the Unicode database, not \w.
        _WORD_CHAR = _category_class(frozenset(['Lu', 'Ll', 'Lt', 'Lm', 'Lo', 'Mn', 'Mc', 'Me', 'Nd']))
        _DIGIT = _category_class(frozenset(['Nd']))
    return _WORD_CHAR, _DIGIT


def token_patterns():
    word, digit = _classes()
    # A single joiner between two token characters stays inside the token: ' or - anywhere,
    # . or , only between two decimal digits (docs/tokenize.md). U+2019 is already rewritten to '.
    joiner = "(?:['\\-]|(?<=" + digit + ')[.,](?=' + digit + '))'
    token_re = re.compile(word + '+(?:' + joiner + word + '+)*')
    # A number has no letter and no mark: decimal digits and joiners only.
    number_re = re.compile('(?:' + digit + "|['.,\\-])+")
    return token_re, number_re


def normalize_text(text):
    """NFC, then the typographic apostrophe U+2019 becomes the ASCII apostrophe."""
    return unicodedata.normalize('NFC', text).replace('\u2019', "'")


def load_stopwords(tok_cfg, config_dir):
    """One word per line; '#' starts a comment; trimmed; normalised like a token; blank lines ignored."""
    path = tok_cfg.get('stopwords')
    if not path:
        return frozenset()
    if not os.path.isabs(path):
        path = os.path.join(config_dir, path)
    with open(path, encoding='utf-8') as f:
        content = f.read()
    words = (normalize_text(line.split('#', 1)[0].strip()) for line in content.split('\n'))
    if tok_cfg['lowercase']:
        words = (w.lower() for w in words)
    return frozenset(w for w in words if w)


def tokenize_document(text, tok_cfg, stopwords, token_re, number_re):
    """Tokens of one document, in order, after every step of the tokenizer (docs/tokenize.md)."""
    policy = tok_cfg['numbers']
    lowercase = tok_cfg['lowercase']
    min_len = int(tok_cfg['minLength'])
    placeholder = tok_cfg['numberPlaceholder']
    is_number = number_re.fullmatch
    out = []
    append = out.append
    for t in token_re.findall(normalize_text(text)):
        if policy != 'keep' and is_number(t):
            if policy == 'replace':
                append(placeholder)  # never lowercased, never too short, never a stopword
            continue
        if lowercase:
            t = t.lower()
        if len(t) < min_len or t in stopwords:
            continue
        append(t)
    return out


# JavaScript's \S: anything but WhiteSpace (incl. U+FEFF and every Zs) and LineTerminator.
_JS_NON_SPACE = re.compile('[^\t\n\x0b\x0c\r \xa0\u1680\u2000-\u200a\u2028\u2029\u202f\u205f\u3000\ufeff]')


def read_documents(path):
    """One document per line: lines end at '\\n', a trailing '\\r' is removed, blank lines are not documents."""
    with open(path, 'rb') as f:
        data = f.read().decode('utf-8', errors='replace')
    lines = (line[:-1] if line.endswith('\r') else line for line in data.split('\n'))
    return [line for line in lines if _JS_NON_SPACE.search(line)]


# ---------------------------------------------------------------- vocabulary


def tokenize_corpus(docs, tok_cfg, config_dir):
    """Provisional ids of every kept token (first-seen order), the id -> term list, and tokens per document."""
    token_re, number_re = token_patterns()
    stopwords = load_stopwords(tok_cfg, config_dir)
    index = {}
    all_ids = array('q')  # 8 bytes per token, not a list of Python ints
    lengths = np.zeros(len(docs), dtype=np.int64)
    for d, text in enumerate(docs):
        toks = tokenize_document(text, tok_cfg, stopwords, token_re, number_re)
        lengths[d] = len(toks)
        setdefault = index.setdefault
        all_ids.extend([setdefault(t, len(index)) for t in toks])
    terms = list(index.keys())
    return np.frombuffer(all_ids, dtype=np.int64) if len(all_ids) else np.zeros(0, dtype=np.int64), terms, lengths


def build_vocabulary(prov_ids, terms, doc_of_token, n_docs, voc_cfg):
    """Final vocabulary: (kept terms in id order, count, doc_freq, map provisional id -> final id or -1)."""
    u = len(terms)
    counts = np.bincount(prov_ids, minlength=u)
    pairs = np.unique(doc_of_token * np.int64(max(u, 1)) + prov_ids)
    doc_freq = np.bincount(pairs % max(u, 1), minlength=u) if u else np.zeros(0, dtype=np.int64)
    keep = np.flatnonzero((counts >= voc_cfg['minCount']) & (doc_freq >= voc_cfg['minDocFreq']))
    # count descending, ties by term in code point order (Python compares str by code point)
    rank_of_term = np.empty(u, dtype=np.int64)
    rank_of_term[np.array(sorted(range(u), key=terms.__getitem__), dtype=np.int64)] = np.arange(u)
    order = keep[np.lexsort((rank_of_term[keep], -counts[keep]))]
    if voc_cfg['maxSize'] > 0:
        order = order[: voc_cfg['maxSize']]
    final = np.full(u, -1, dtype=np.int64)
    final[order] = np.arange(len(order))
    return [terms[i] for i in order], counts[order], doc_freq[order], final


# ---------------------------------------------------------------- counting

PAIRS_PER_CHUNK = 1 << 23


def count_windows(ids, doc_of_token, n_terms, ctx):
    """Windowed co-occurrence counts; ids are final ids with -1 for out-of-vocabulary tokens (they keep their positions)."""
    k = int(ctx['window'])
    direction = ctx['direction']
    harmonic = ctx['weighting'] == 'harmonic'
    # Harmonic weights 1/d summed as exact integers lcm(1..k)/d and divided once at the end (k <= 16),
    # so the sums do not depend on the order of addition.
    scale = math.lcm(*range(1, k + 1)) if harmonic and k <= 16 else 1
    n = len(ids)
    ids32 = ids.astype(np.int32)
    acc = sp.csr_matrix((n_terms, n_terms), dtype=np.float64)
    n_dir = 2 if direction == 'symmetric' else 1
    chunk = max(1024, PAIRS_PER_CHUNK // max(1, k * n_dir))
    for start in range(0, n, chunk):
        rows, cols, vals = [], [], []
        for d in range(1, k + 1):
            end = min(start + chunk, n - d)
            if end <= start:
                continue
            a = ids32[start:end]  # token at position p
            b = ids32[start + d:end + d]  # token at position p + d
            mask = (doc_of_token[start:end] == doc_of_token[start + d:end + d]) & (a >= 0) & (b >= 0)
            a = a[mask]
            b = b[mask]
            w = np.full(len(a), (scale // d if scale > 1 else 1.0 / d) if harmonic else 1.0, dtype=np.float64)
            if direction in ('symmetric', 'right'):  # target p, context p + d
                rows.append(a)
                cols.append(b)
                vals.append(w)
            if direction in ('symmetric', 'left'):  # target p + d, context p
                rows.append(b)
                cols.append(a)
                vals.append(w)
        if rows:
            part = sp.coo_matrix(
                (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n_terms, n_terms)
            ).tocsr()
            acc = acc + part
    if scale > 1:
        acc.data /= scale
    return acc


def count_documents(ids, doc_of_token, n_terms, n_docs):
    """Term x document counts: count(t, d) = occurrences of in-vocabulary term t in document d."""
    mask = ids >= 0
    return sp.coo_matrix(
        (np.ones(int(mask.sum())), (ids[mask], doc_of_token[mask])), shape=(n_terms, n_docs)
    ).tocsr()


# ---------------------------------------------------------------- output


def write_coo(path, X):
    X = sp.csr_matrix(X)
    X.sort_indices()
    rows = np.repeat(np.arange(X.shape[0], dtype=np.int64), np.diff(X.indptr))
    with open(path, 'wb') as f:
        f.write(np.asarray([X.nnz], dtype='<i8').tobytes())
        f.write(rows.astype('<i4').tobytes())
        f.write(X.indices.astype('<i4').tobytes())
        f.write(X.data.astype('<f8').tobytes())


def run(input_path, config_path, out_dir):
    t0 = time.perf_counter()
    with open(config_path, encoding='utf-8') as f:
        cfg = json.load(f)
    config_dir = os.path.dirname(os.path.abspath(config_path))
    docs = read_documents(input_path)
    n_docs = len(docs)
    prov_ids, terms, lengths = tokenize_corpus(docs, cfg['tokenize'], config_dir)
    doc_of_token = np.repeat(np.arange(n_docs, dtype=np.int32), lengths)
    t_tok = time.perf_counter()
    vocab, counts, doc_freq, final = build_vocabulary(prov_ids, terms, doc_of_token, n_docs, cfg['vocabulary'])
    ids = final[prov_ids] if len(prov_ids) else np.zeros(0, dtype=np.int64)
    n_terms = len(vocab)
    ctx = cfg['contexts']
    if ctx['type'] == 'window':
        C = count_windows(ids, doc_of_token, n_terms, ctx)
    elif ctx['type'] == 'document':
        C = count_documents(ids, doc_of_token, n_terms, n_docs)
    else:
        raise ValueError('unknown contexts.type %r' % ctx['type'])
    C.sum_duplicates()
    C.eliminate_zeros()
    C.sort_indices()
    t_count = time.perf_counter()
    W = normalize(weight(C, cfg['weighting']), cfg['normalize'])
    t_weight = time.perf_counter()

    os.makedirs(out_dir, exist_ok=True)
    with open(os.path.join(out_dir, 'vocab.txt'), 'w', encoding='utf-8', newline='\n') as f:
        f.write(''.join(t + '\n' for t in vocab))
    with open(os.path.join(out_dir, 'vocab-stats.tsv'), 'w', encoding='utf-8', newline='\n') as f:
        f.write('id\tterm\tcount\tdoc_freq\n')
        f.write(''.join('%d\t%s\t%d\t%d\n' % (i, t, c, d) for i, (t, c, d) in enumerate(zip(vocab, counts, doc_freq))))
    write_coo(os.path.join(out_dir, 'counts.bin'), C)
    write_coo(os.path.join(out_dir, 'weighted.bin'), W)
    meta = {
        'nRows': C.shape[0],
        'nCols': C.shape[1],
        'nDocuments': n_docs,
        'nTokens': int(len(prov_ids)),
        'countsNnz': int(C.nnz),
        'weightedNnz': int(W.nnz),
        'seconds': {
            'tokenize': t_tok - t0,
            'vocabularyAndCount': t_count - t_tok,
            'weight': t_weight - t_count,
            'total': time.perf_counter() - t0,
        },
    }
    with open(os.path.join(out_dir, 'meta.json'), 'w', encoding='utf-8') as f:
        json.dump(meta, f, indent=2)
    return meta


def main():
    ap = argparse.ArgumentParser(description='numpy/scipy reference build (one document per input line)')
    ap.add_argument('--input', required=True, help='UTF-8 text, one document per line')
    ap.add_argument('--config', required=True, help='resolved kindred config (JSON)')
    ap.add_argument('--out', required=True, help='output directory')
    args = ap.parse_args()
    run(args.input, args.config, args.out)


if __name__ == '__main__':
    main()
