#!/usr/bin/env python3
"""Turn a project written by `treewright sample --synthetic` into one of the two hard
shapes of the scale checks (issue 17, part 6), in place:

  misfit.py random DIR   the means replaced by independent N(0, s²) draws (s the spread of
                         the original means), the tree and variances kept: a tree that does
                         not fit its embeddings at all;
  misfit.py flat DIR     every phrase placed directly under the root (a flat, wide tree),
                         the embeddings kept.

Needs NumPy. Seeded, so every run writes the same files.
"""
import json
import sys

import numpy as np


def main() -> None:
    mode, d = sys.argv[1], sys.argv[2]
    if mode == "random":
        m = np.load(f"{d}/means.npy")
        s = float(m.std())
        rng = np.random.default_rng(17)
        np.save(f"{d}/means.npy", (rng.standard_normal(m.shape) * s).astype("<f4"))
    elif mode == "flat":
        with open(f"{d}/tree.json") as f:
            t = json.load(f)
        root = t["root"]
        ids = set(t["parent"]) | set(t["parent"].values())
        t["parent"] = {k: root for k in sorted(ids) if k != root}
        with open(f"{d}/tree.json", "w") as f:
            json.dump(t, f, indent=2)
    else:
        sys.exit(f"unknown mode {mode!r} (random or flat)")


if __name__ == "__main__":
    main()
