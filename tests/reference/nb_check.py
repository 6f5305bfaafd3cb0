"""Outside reference for sieveline's Naive Bayes: scikit-learn's MultinomialNB and ComplementNB.

Fits the reference on the exact term-count matrix sieveline exported (`train --dump-counts`),
scores the test records sieveline scored (`classify --scores`, known terms only), and prints
a JSON summary: the largest relative difference of joint log likelihoods and the share of
identical predictions.
"""
import argparse
import json

import numpy as np
import scipy.sparse as sp
import sklearn
from sklearn.naive_bayes import ComplementNB, MultinomialNB


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--dump", required=True)
    ap.add_argument("--decisions", required=True)
    ap.add_argument("--kind", choices=["multinomial", "complement"], required=True)
    ap.add_argument("--alpha", type=float, required=True)
    ap.add_argument("--priors", choices=["learned", "uniform"], default="learned")
    a = ap.parse_args()

    with open(a.dump) as f:
        dump = json.load(f)
    classes = dump["classes"]
    vocab = dump["vocabulary"]
    col = {t: i for i, t in enumerate(vocab)}
    rows, cols, vals, y = [], [], [], []
    for r, row in enumerate(dump["rows"]):
        y.append(row["y"])
        for c, v in row["x"]:
            rows.append(r)
            cols.append(c)
            vals.append(v)
    X = sp.csr_matrix((vals, (rows, cols)), shape=(len(dump["rows"]), len(vocab)), dtype=np.float64)
    y = np.array(y)

    if a.kind == "multinomial":
        clf = MultinomialNB(alpha=a.alpha, fit_prior=(a.priors == "learned"))
    else:
        clf = ComplementNB(alpha=a.alpha, norm=False)
    clf.fit(X, y)
    assert list(clf.classes_) == list(range(len(classes))), "every class must appear in training"

    decisions = []
    with open(a.decisions) as f:
        for line in f:
            if line.strip():
                decisions.append(json.loads(line))
    trows, tcols, tvals = [], [], []
    for r, d in enumerate(decisions):
        for term, w in d["features"]:
            trows.append(r)
            tcols.append(col[term])
            tvals.append(w)
    Xt = sp.csr_matrix((tvals, (trows, tcols)), shape=(len(decisions), len(vocab)), dtype=np.float64)
    ref = clf.predict_joint_log_proba(Xt)
    ours = np.array([d["log_scores"] for d in decisions], dtype=np.float64)
    rel = np.abs(ref - ours) / np.maximum(np.abs(ref), 1e-300)
    ref_pred = [classes[i] for i in np.argmax(ref, axis=1)]
    agree = float(np.mean([p == d["class"] for p, d in zip(ref_pred, decisions)]))
    print(json.dumps({
        "sklearn": sklearn.__version__,
        "n_test": len(decisions),
        "n_features": len(vocab),
        "max_rel_err": float(rel.max()),
        "agreement": agree,
    }))


if __name__ == "__main__":
    main()
