"""Write the interop fixtures in tests/data/interop/ with the libraries people use.

Run once by a maintainer (not by CI), from the repository root, in a virtual environment:

    python3 -m venv /tmp/interop && /tmp/interop/bin/pip install numpy pandas pyarrow rdflib scikit-learn
    /tmp/interop/bin/python benches/interop/make.py

It prints the library versions and the reference values the Rust tests record
(NumPy means/variances, scikit-learn's LedoitWolf shrinkage and covariance).

    /tmp/interop/bin/python benches/interop/make.py codecs

writes only the Parquet codec fixtures (occurrences_{zstd,lz4,gzip}.parquet, and
occurrences_row_groups.parquet: many small row groups and pages) from the committed
occurrences.npy and occurrences_ids.json, leaving every other fixture as it is (needs
numpy, pandas and pyarrow only).
Every file is small and deterministic (fixed seed). Data: the invented Fernhollow Garden
Supply garden centre.
"""

import json
import os
import sys

import numpy as np
import pandas as pd
import pyarrow

OUT = os.path.join("tests", "data", "interop")


def codecs():
    """Occurrence tables as pandas/pyarrow write them with each compression codec."""
    import pyarrow.parquet as pq

    vecs = np.load(os.path.join(OUT, "occurrences.npy"))
    with open(os.path.join(OUT, "occurrences_ids.json")) as f:
        ids = json.load(f)
    df = pd.DataFrame({"phrase_id": ids, "vector": [v.astype(np.float32) for v in vecs]})
    for codec in ["zstd", "lz4", "gzip"]:
        df.to_parquet(os.path.join(OUT, f"occurrences_{codec}.parquet"), index=False,
                      compression=codec)
    # several row groups and data pages, so the streaming reader crosses their boundaries
    pq.write_table(pyarrow.Table.from_pandas(df, preserve_index=False),
                   os.path.join(OUT, "occurrences_row_groups.parquet"), row_group_size=16,
                   data_page_size=128, compression="snappy")
    print("numpy", np.__version__, "pandas", pd.__version__, "pyarrow", pyarrow.__version__)


if sys.argv[1:] == ["codecs"]:
    codecs()
    sys.exit(0)

import rdflib  # noqa: E402  (the full run only)
import sklearn  # noqa: E402
from rdflib.namespace import RDF, SKOS  # noqa: E402
from sklearn.covariance import LedoitWolf  # noqa: E402

os.makedirs(OUT, exist_ok=True)
rng = np.random.default_rng(16)

PHRASES = [
    ("plants", "Plants"),
    ("succulent", "succulent"),
    ("shade-loving", "shade loving"),
    ("peat-free-compost", "peat free compost"),
    ("compost", "compost"),
]
N, D = len(PHRASES), 3

# --- phrases.json (our own schema) ---
with open(os.path.join(OUT, "phrases.json"), "w") as f:
    json.dump([{"id": i, "label": l} for i, l in PHRASES], f, indent=1)
    f.write("\n")

# --- .npz: np.savez (float32) and np.savez_compressed (float64) ---
mu = rng.normal(size=(N, D))
var = rng.uniform(0.2, 2.0, size=(N, D))
np.savez(os.path.join(OUT, "emb_savez.npz"), mu=mu.astype(np.float32), var=var.astype(np.float32))
np.savez_compressed(os.path.join(OUT, "emb_savez_compressed.npz"), mu=mu, var=var)

# --- Parquet via pandas/pyarrow: one row per phrase, list-of-float columns ---
# rows deliberately not in phrase order: the loader matches by id
order = [3, 0, 4, 1, 2]
df = pd.DataFrame(
    {
        "phrase_id": [PHRASES[i][0] for i in order],
        "label": [PHRASES[i][1] for i in order],
        "mean": [mu[i].tolist() for i in order],
        "var": [var[i].astype(np.float32).tolist() for i in order],
    }
)
df["var"] = df["var"].apply(lambda v: np.asarray(v, dtype=np.float32))
df.to_parquet(os.path.join(OUT, "emb.parquet"), index=False)

# --- SKOS taxonomy via rdflib (Turtle) ---
EX = rdflib.Namespace("http://example.org/fernhollow/taxonomy/")
g = rdflib.Graph()
g.bind("skos", SKOS)
g.bind("ex", EX)
def concept(key, pref, notation=None, alt=None, broader=None):
    c = EX[key]
    g.add((c, RDF.type, SKOS.Concept))
    g.add((c, SKOS.prefLabel, rdflib.Literal(pref, lang="en")))
    if notation:
        g.add((c, SKOS.notation, rdflib.Literal(notation)))
    if alt:
        g.add((c, SKOS.altLabel, rdflib.Literal(alt, lang="en")))
    if broader:
        g.add((c, SKOS.broader, EX[broader]))
    return c
concept("root", "Plants", notation="plants")
concept("succ", "Succulents", alt="Succulent", broader="root")
concept("shade", "Shade Loving", broader="root")
concept("soil", "Soil and compost", broader="root")
concept("compost", "Compost", broader="soil")
concept("peatfree", "Peat-free compost", notation="peat-free-compost", broader="compost")
g.serialize(os.path.join(OUT, "taxonomy.ttl"), format="turtle")
g.serialize(os.path.join(OUT, "taxonomy.rdf"), format="xml")

# --- occurrence vectors: Parquet (phrase_id, vector) and .npy + ids JSON ---
counts = {"plants": 40, "succulent": 25, "shade-loving": 3, "peat-free-compost": 12, "compost": 1}
ids, vecs = [], []
for k, (pid, _) in enumerate(PHRASES):
    centre = rng.normal(scale=3.0, size=4)
    mix = rng.normal(size=(4, 4))  # correlated coordinates, so Ledoit-Wolf has work to do
    for _ in range(counts[pid]):
        ids.append(pid)
        vecs.append(centre + (rng.normal(size=4) @ mix) * (0.5 + 0.2 * k))
vecs = np.array(vecs)
perm = rng.permutation(len(ids))
ids = [ids[i] for i in perm]
vecs = vecs[perm]
pd.DataFrame({"phrase_id": ids, "vector": [v.astype(np.float32) for v in vecs]}).to_parquet(
    os.path.join(OUT, "occurrences.parquet"), index=False
)
np.save(os.path.join(OUT, "occurrences.npy"), vecs)
with open(os.path.join(OUT, "occurrences_ids.json"), "w") as f:
    json.dump(ids, f)
    f.write("\n")

print("numpy", np.__version__, "pandas", pd.__version__, "pyarrow", pyarrow.__version__,
      "rdflib", rdflib.__version__, "scikit-learn", sklearn.__version__)
np.set_printoptions(precision=17)
for pid in ["plants", "succulent"]:
    x = vecs[[i for i, p in enumerate(ids) if p == pid]]
    print(pid, "n", len(x))
    print("  mean", repr(x.mean(axis=0)))
    print("  var (ddof=0)", repr(x.var(axis=0)))
    print("  var (ddof=1)", repr(x.var(axis=0, ddof=1)))
    lw = LedoitWolf().fit(x)
    print("  LedoitWolf shrinkage", repr(lw.shrinkage_))
    print("  LedoitWolf covariance", repr(lw.covariance_.ravel()))
