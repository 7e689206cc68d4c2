"""Write a synthetic occurrence table for timing `treewright fit` at scale.

    python3 benches/fit/make_occurrences.py ROWS DIM PHRASES OUTDIR

writes OUTDIR/occ.parquet (pyarrow, Snappy, columns phrase_id and vector: list<float32>,
the layout pandas writes) and OUTDIR/occ.npy (float32, ROWS × DIM) with OUTDIR/occ_ids.json,
in chunks of 1 000 000 rows so the generator itself stays small. Needs numpy and pyarrow.
Synthetic data (random centres and noise), no real data.
"""

import json
import os
import sys

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

rows, dim, phrases, out = int(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3]), sys.argv[4]
os.makedirs(out, exist_ok=True)
rng = np.random.default_rng(16)
centres = rng.normal(scale=3.0, size=(phrases, dim)).astype(np.float32)
names = np.array([f"phrase-{i:06d}" for i in range(phrases)])
schema = pa.schema([("phrase_id", pa.string()), ("vector", pa.list_(pa.float32()))])
writer = pq.ParquetWriter(os.path.join(out, "occ.parquet"), schema, compression="snappy")
npy = np.lib.format.open_memmap(os.path.join(out, "occ.npy"), mode="w+", dtype=np.float32,
                                shape=(rows, dim))
ids_file = open(os.path.join(out, "occ_ids.json"), "w")
ids_file.write("[")
CHUNK = 1_000_000
for start in range(0, rows, CHUNK):
    n = min(CHUNK, rows - start)
    who = rng.integers(0, phrases, size=n)
    x = centres[who] + rng.normal(size=(n, dim)).astype(np.float32)
    offsets = pa.array(np.arange(0, (n + 1) * dim, dim, dtype=np.int32))
    vec = pa.ListArray.from_arrays(offsets, pa.array(x.ravel()))
    writer.write_table(pa.table({"phrase_id": pa.array(names[who]), "vector": vec}, schema=schema))
    npy[start:start + n] = x
    ids_file.write(("," if start else "") + ",".join(json.dumps(s) for s in names[who]))
writer.close()
npy.flush()
ids_file.write("]\n")
ids_file.close()
