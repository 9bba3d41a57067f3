#!/usr/bin/env python3
"""Cross-checks the vectorised reference build against a slow, literal loop implementation of the same rules.

  python3 scripts/reference/naive_check.py --input docs.txt --config a.json [--config b.json ...]

Prints a JSON list, one report per config: {"tokensEqual", "vocabEqual", "countsEqual", "maxAbsDiff",
"nDocuments", "nTokens", "nnz"}.
The loop version reads characters one at a time with unicodedata.category (no regular expressions)
and counts pairs with explicit loops over positions, so it shares no code with pipeline.py's counting.
"""
import argparse
import json
import os
import sys
import unicodedata
from collections import defaultdict

sys.dont_write_bytecode = True  # keep the repository free of __pycache__
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import pipeline  # noqa: E402

def is_word_char(ch):
    cat = unicodedata.category(ch)
    return cat[0] in ('L', 'M') or cat == 'Nd'


def is_digit(ch):
    return unicodedata.category(ch) == 'Nd'


def joins(text, j):
    """True when text[j] is a joiner with token characters on both sides (docs/tokenize.md)."""
    if j == 0 or j + 1 >= len(text) or not is_word_char(text[j - 1]) or not is_word_char(text[j + 1]):
        return False
    if text[j] in ("'", '-'):
        return True
    return text[j] in ('.', ',') and is_digit(text[j - 1]) and is_digit(text[j + 1])


def naive_tokens(text):
    text = unicodedata.normalize('NFC', text).replace('\u2019', "'")
    out = []
    i = 0
    n = len(text)
    while i < n:
        if not is_word_char(text[i]):
            i += 1
            continue
        j = i
        while True:
            while j < n and is_word_char(text[j]):
                j += 1
            if j < n and joins(text, j):
                j += 1
                continue
            break
        out.append(text[i:j])
        i = j
    return out


def is_number(tok):
    return not any(unicodedata.category(c)[0] in ('L', 'M') for c in tok)


def naive_document_tokens(text, tok, stopwords):
    out = []
    for t in naive_tokens(text):
        if tok['numbers'] != 'keep' and is_number(t):
            if tok['numbers'] == 'replace':
                out.append(tok['numberPlaceholder'])
            continue
        if tok['lowercase']:
            t = t.lower()
        if len(t) < tok['minLength'] or t in stopwords:
            continue
        out.append(t)
    return out


def naive_build(docs, cfg, config_dir):
    tok = cfg['tokenize']
    stopwords = pipeline.load_stopwords(tok, config_dir)
    doc_tokens = [naive_document_tokens(text, tok, stopwords) for text in docs]
    count = defaultdict(int)
    df = defaultdict(int)
    for toks in doc_tokens:
        for t in toks:
            count[t] += 1
        for t in set(toks):
            df[t] += 1
    voc = cfg['vocabulary']
    kept = [t for t in count if count[t] >= voc['minCount'] and df[t] >= voc['minDocFreq']]
    kept.sort(key=lambda t: (-count[t], [ord(c) for c in t]))
    if voc['maxSize'] > 0:
        kept = kept[: voc['maxSize']]
    ids = {t: i for i, t in enumerate(kept)}
    pairs = defaultdict(float)
    ctx = cfg['contexts']
    for d, toks in enumerate(doc_tokens):
        if ctx['type'] == 'document':
            for t in toks:
                if t in ids:
                    pairs[(ids[t], d)] += 1.0
            continue
        k = ctx['window']
        for i, t in enumerate(toks):
            if t not in ids:
                continue
            for j in range(max(0, i - k), min(len(toks), i + k + 1)):
                if j == i or toks[j] not in ids:
                    continue
                if ctx['direction'] == 'left' and j > i:
                    continue
                if ctx['direction'] == 'right' and j < i:
                    continue
                w = 1.0 / abs(i - j) if ctx['weighting'] == 'harmonic' else 1.0
                pairs[(ids[t], ids[toks[j]])] += w
    return doc_tokens, kept, pairs


def check(docs, config_path):
    import numpy as np

    with open(config_path, encoding='utf-8') as f:
        cfg = json.load(f)
    config_dir = os.path.dirname(os.path.abspath(config_path))

    naive_docs, naive_vocab, naive_pairs = naive_build(docs, cfg, config_dir)

    token_re, number_re = pipeline.token_patterns()
    stopwords = pipeline.load_stopwords(cfg['tokenize'], config_dir)
    fast_docs = [pipeline.tokenize_document(t, cfg['tokenize'], stopwords, token_re, number_re) for t in docs]
    prov_ids, terms, lengths = pipeline.tokenize_corpus(docs, cfg['tokenize'], config_dir)
    doc_of_token = np.repeat(np.arange(len(docs), dtype=np.int32), lengths)
    vocab, _, _, final = pipeline.build_vocabulary(prov_ids, terms, doc_of_token, len(docs), cfg['vocabulary'])
    ids = final[prov_ids]
    if cfg['contexts']['type'] == 'window':
        C = pipeline.count_windows(ids, doc_of_token, len(vocab), cfg['contexts'])
    else:
        C = pipeline.count_documents(ids, doc_of_token, len(vocab), len(docs))
    C = C.tocoo()
    fast_pairs = {(int(r), int(c)): float(v) for r, c, v in zip(C.row, C.col, C.data) if v != 0}
    same_keys = set(fast_pairs) == set(naive_pairs)
    max_diff = max((abs(fast_pairs[key] - naive_pairs[key]) for key in fast_pairs if key in naive_pairs), default=0.0)
    return {
        'config': config_path,
        'tokensEqual': fast_docs == naive_docs,
        'vocabEqual': vocab == naive_vocab,
        'countsEqual': same_keys and max_diff <= 1e-9,
        'maxAbsDiff': max_diff,
        'nDocuments': len(docs),
        'nTokens': sum(len(t) for t in naive_docs),
        'nnz': len(naive_pairs),
    }


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument('--input', required=True)
    ap.add_argument('--config', required=True, action='append')
    args = ap.parse_args()
    docs = pipeline.read_documents(args.input)
    print(json.dumps([check(docs, c) for c in args.config]))


if __name__ == '__main__':
    main()
