#!/usr/bin/env python3
"""Measure a treewright binary on the real check sets made by make.py (needs numpy only).

For every project folder under benches/real/ (or the folders given):

Audit (``BIN audit DIR --format json``, or a saved report with --audit-json when one folder
is given), against known-errors.json:
  * flagged set = nodes with an open finding of severity warning or error from the placement
    rules better-parent, weak-inclusion, inverted-generality;
  * precision and recall of the flagged set against all known errors, recall per error kind
    (far, near, too-high, duplicate), flagged nodes and precision per rule;
  * average precision (AP) of the ranking: distinct nodes in the report's order of their
    first placement finding (any severity) against the moved nodes (far, near, too-high);
  * better-parent accuracy: among flagged moved nodes, the share with a better-parent
    finding whose target is the true parent;
  * duplicates found: planted copies with a near-duplicate finding (warning or error)
    pairing them with their original.

Build (``BIN build DIR --out TMP``, defaults, seed 0), against truth-tree.json:
  * ancestor-pair F1: F1 between the sets of (node, ancestor) pairs of the two trees;
  * exact-parent share: share of the truth's non-root nodes whose parent is the same;
  * depth and depth profile (nodes per depth, root = 0; in the --json output).
The audit is also run on a copy whose tree.json is the truth (every flag there is a false
alarm: "flagged on the true tree"). The same two tree figures for the greedy baseline (each phrase's parent = the broader phrase,
larger ln det Sigma, with the lowest KL(phrase || candidate); the broadest phrase is the
root) and for the planted tree.json itself (what the audit starts from).

Usage:
    python3 benches/real/measure.py --bin /path/to/treewright [DIR ...] [--json OUT]
"""

from __future__ import annotations

import argparse
import json
import shutil
import subprocess
import sys
import tempfile
from collections import defaultdict
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
PLACEMENT = ("better-parent", "weak-inclusion", "inverted-generality")
KINDS = ("far", "near", "too-high", "duplicate")
MOVED = ("far", "near", "too-high")


def load_json(p: Path):
    return json.loads(p.read_text(encoding="utf-8"))


def ratio(a, b):
    return a / b if b else float("nan")


# --------------------------------------------------------------------------- audit


def audit_metrics(report: dict, known: list[dict]) -> dict:
    findings = report["findings"]
    open_f = [f for f in findings if not f.get("accepted", False)]
    err_kind = {e["node"]: e["kind"] for e in known}
    true_parent = {e["node"]: e.get("true_parent") for e in known}
    moved = {n for n, k in err_kind.items() if k in MOVED}

    flagged = set()
    per_rule = defaultdict(set)
    for f in open_f:
        if f["rule"] in PLACEMENT and f["severity"] in ("warning", "error"):
            flagged.add(f["node"])
            per_rule[f["rule"]].add(f["node"])
    tp = flagged & set(err_kind)
    out = {
        "findings": len(findings),
        "open_errors": sum(f["severity"] == "error" for f in open_f),
        "open_warnings": sum(f["severity"] == "warning" for f in open_f),
        "open_info": sum(f["severity"] == "info" for f in open_f),
        "known_errors": len(err_kind),
        "flagged": len(flagged),
        "precision": ratio(len(tp), len(flagged)),
        "recall": ratio(len(tp), len(err_kind)),
        "recall_moved": ratio(len(flagged & moved), len(moved)),
    }
    for k in KINDS:
        nodes = {n for n, kk in err_kind.items() if kk == k}
        out[f"recall_{k}"] = ratio(len(flagged & nodes), len(nodes))
        out[f"found_{k}"] = f"{len(flagged & nodes)}/{len(nodes)}"
    out["rules"] = {
        r: {"flagged": len(s), "precision": ratio(len(s & set(err_kind)), len(s))}
        for r, s in sorted(per_rule.items())
    }

    # ranking: distinct nodes by first placement finding (any severity)
    ranked, seen = [], set()
    for f in open_f:
        if f["rule"] in PLACEMENT and f["node"] not in seen:
            seen.add(f["node"])
            ranked.append(f["node"])
    hits, ap = 0, 0.0
    for i, n in enumerate(ranked, 1):
        if n in moved:
            hits += 1
            ap += hits / i
    out["average_precision"] = ratio(ap, len(moved))
    for k in (10, 50, 100):
        top = ranked[:k]
        out[f"precision_at_{k}"] = ratio(sum(n in err_kind for n in top), len(top))

    # better-parent names the true parent
    bp_target = {}
    for f in open_f:
        if f["rule"] == "better-parent" and f["node"] not in bp_target and f.get("suggestion"):
            bp_target[f["node"]] = f["suggestion"].get("target")
    fm = flagged & moved
    out["better_parent_accuracy"] = ratio(
        sum(bp_target.get(n) == true_parent[n] for n in fm), len(fm))

    # duplicates
    pairs = set()
    for f in open_f:
        if f["rule"] == "near-duplicate" and f["severity"] in ("warning", "error"):
            t = (f.get("suggestion") or {}).get("target")
            if t:
                pairs.add(frozenset((f["node"], t)))
    dups = [e for e in known if e["kind"] == "duplicate"]
    found = sum(frozenset((e["node"], e["duplicate_of"])) in pairs for e in dups)
    out["duplicates_found"] = ratio(found, len(dups))
    out["near_duplicate_findings"] = len(pairs)
    return out


# --------------------------------------------------------------------------- trees


def ancestor_pairs(tree: dict) -> set:
    parent = tree["parent"]
    pairs = set()
    for n in parent:
        p = parent.get(n)
        steps = 0
        while p is not None and steps <= len(parent):
            pairs.add((n, p))
            p = parent.get(p)
            steps += 1
    return pairs


def tree_scores(pred: dict, truth: dict) -> dict:
    pp, tp = ancestor_pairs(pred), ancestor_pairs(truth)
    inter = len(pp & tp)
    prec, rec = ratio(inter, len(pp)), ratio(inter, len(tp))
    f1 = 2 * prec * rec / (prec + rec) if inter else 0.0
    tpar, ppar = truth["parent"], pred["parent"]
    exact = ratio(sum(ppar.get(n) == p for n, p in tpar.items()), len(tpar))
    depth = {}

    def d(n):
        k = 0
        while n in ppar and k <= len(ppar):
            n = ppar[n]
            k += 1
        return k

    for n in ppar:
        depth[n] = d(n)
    profile = [0] * (max(depth.values(), default=0) + 1)
    for k in depth.values():
        profile[k] += 1
    profile[0] = 1  # the root
    return {"f1": f1, "exact_parent": exact, "depth": len(profile) - 1,
            "depth_profile": profile, "root": pred["root"]}


def greedy_tree(ids: list[str], means: np.ndarray, variances: np.ndarray) -> dict:
    """Each phrase's parent = the strictly broader phrase with the lowest KL(phrase || it)."""
    m = means.astype(np.float64)
    v = variances.astype(np.float64)
    logv = np.log(v)
    logdet = logv.sum(axis=1)
    inv = 1.0 / v
    n, dim = m.shape
    root = int(np.argmax(logdet))
    parent = {}
    for start in range(0, n, 256):
        sl = slice(start, min(n, start + 256))
        mc, vc, lc = m[sl], v[sl], logv[sl].sum(axis=1)
        # KL(c || p) = 0.5 [sum vc/vp + sum (mp-mc)^2/vp - d + logdet p - logdet c]
        t1 = vc @ inv.T
        t2 = (mc**2) @ inv.T - 2 * mc @ (m * inv).T + (m**2 * inv).sum(axis=1)[None, :]
        kl = 0.5 * (t1 + t2 - dim + logdet[None, :] - lc[:, None])
        kl[~(logdet[None, :] > logdet[sl, None])] = np.inf
        best = kl.argmin(axis=1)
        for r, i in enumerate(range(sl.start, sl.stop)):
            if i == root:
                continue
            j = int(best[r]) if np.isfinite(kl[r, best[r]]) else root
            parent[ids[i]] = ids[j]
    return {"root": ids[root], "parent": parent}


# --------------------------------------------------------------------------- driver


def measure(bin_path: str | None, d: Path, audit_json: Path | None) -> dict:
    known = load_json(d / "known-errors.json")
    truth = load_json(d / "truth-tree.json")
    planted = load_json(d / "tree.json")
    ids = [p["id"] for p in load_json(d / "phrases.json")]
    res = {"project": d.name, "phrases": len(ids)}
    if audit_json:
        report = load_json(audit_json)
    else:
        out = subprocess.run([bin_path, "audit", str(d), "--format", "json"],
                             check=True, capture_output=True)
        report = json.loads(out.stdout)
    res["audit"] = audit_metrics(report, known)
    if bin_path:
        res["audit_on_truth"] = audit_on_truth(bin_path, d)
    res["planted_tree"] = tree_scores(planted, truth)
    means = np.load(d / "means.npy")
    variances = np.load(d / "variances.npy")
    res["greedy"] = tree_scores(greedy_tree(ids, means, variances), truth)
    if bin_path:
        with tempfile.TemporaryDirectory() as tmp:
            t = Path(tmp) / "tree.json"
            subprocess.run([bin_path, "build", str(d), "--out", str(t), "--report",
                            str(Path(tmp) / "report.json")], check=True,
                           capture_output=True)
            res["build"] = tree_scores(load_json(t), truth)
    return res


def audit_on_truth(bin_path: str, d: Path) -> dict:
    """Audit a copy of the project whose tree.json is the truth: every flag is a false alarm."""
    with tempfile.TemporaryDirectory() as tmp:
        c = Path(tmp) / d.name
        shutil.copytree(d, c)
        shutil.copyfile(d / "truth-tree.json", c / "tree.json")
        out = subprocess.run([bin_path, "audit", str(c), "--format", "json"],
                             check=True, capture_output=True)
    rep = json.loads(out.stdout)
    flagged = {f["node"] for f in rep["findings"]
               if f["rule"] in PLACEMENT and f["severity"] in ("warning", "error")
               and not f.get("accepted", False)}
    return {"flagged": len(flagged),
            "open_errors": sum(f["severity"] == "error" for f in rep["findings"]),
            "open_warnings": sum(f["severity"] == "warning" for f in rep["findings"])}


def fmt(x):
    return "–" if x is None or (isinstance(x, float) and x != x) else f"{x:.2f}"


def tables(results: list[dict]) -> str:
    lines = [
        "| project | phrases | known errors | flagged (w+e) | precision | recall | "
        "far | near | too-high | dup (placement rules) | AP (moved) | P@10 | P@50 | "
        "better-parent → true parent | duplicates found (near-duplicate) |",
        "|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|",
    ]
    for r in results:
        a = r["audit"]
        lines.append(
            f"| {r['project']} | {r['phrases']} | {a['known_errors']} | {a['flagged']} | "
            f"{fmt(a['precision'])} | {fmt(a['recall'])} | {a['found_far']} | "
            f"{a['found_near']} | {a['found_too-high']} | {a['found_duplicate']} | "
            f"{fmt(a['average_precision'])} | {fmt(a['precision_at_10'])} | "
            f"{fmt(a['precision_at_50'])} | {fmt(a['better_parent_accuracy'])} | "
            f"{fmt(a['duplicates_found'])} |")
    lines += ["", "| project | open errors / warnings / info (all rules) | flagged on the true tree |"
              " errors / warnings on the true tree (all rules) |", "|---|---|---|---|"]
    for r in results:
        a, t = r["audit"], r.get("audit_on_truth")
        tcells = (f"{t['flagged']} | {t['open_errors']} / {t['open_warnings']}" if t
                  else "– | –")
        lines.append(f"| {r['project']} | {a['open_errors']} / {a['open_warnings']} / "
                     f"{a['open_info']} | {tcells} |")
    lines += ["", "| project | "
              + " | ".join(f"{r} flagged (precision)" for r in PLACEMENT) + " |",
              "|---|" + "---|" * len(PLACEMENT)]
    for r in results:
        a = r["audit"]
        cells = []
        for rule in PLACEMENT:
            s = a["rules"].get(rule)
            cells.append(f"{s['flagged']} ({fmt(s['precision'])})" if s else "0")
        lines.append(f"| {r['project']} | " + " | ".join(cells) + " |")
    lines += ["", "| project | `treewright build` F1 (exact parent, depth) | "
              "greedy baseline F1 (exact parent, depth) | planted tree.json F1 (exact parent) |",
              "|---|---|---|---|"]
    for r in results:
        b, g, p = r.get("build"), r["greedy"], r["planted_tree"]
        bcell = f"{fmt(b['f1'])} ({b['exact_parent']:.0%}, {b['depth']})" if b else "–"
        lines.append(f"| {r['project']} | {bcell} | "
                     f"{fmt(g['f1'])} ({g['exact_parent']:.0%}, {g['depth']}) | "
                     f"{fmt(p['f1'])} ({p['exact_parent']:.0%}) |")
    return "\n".join(lines)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("dirs", nargs="*", type=Path)
    ap.add_argument("--bin", help="treewright binary (needed unless --audit-json)")
    ap.add_argument("--audit-json", type=Path, help="saved audit report (one folder only)")
    ap.add_argument("--json", type=Path, help="also write the figures here")
    args = ap.parse_args()
    dirs = args.dirs or sorted(p.parent for p in HERE.glob("*/known-errors.json"))
    if args.audit_json and len(dirs) != 1:
        sys.exit("--audit-json needs exactly one project folder")
    if not args.bin and not args.audit_json:
        sys.exit("give --bin (or --audit-json for one folder)")
    results = [measure(args.bin, d, args.audit_json) for d in dirs]
    print(tables(results))
    if args.json:
        args.json.write_text(json.dumps(results, indent=1) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
