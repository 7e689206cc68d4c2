#!/usr/bin/env python3
"""Regenerate the Fernhollow three-shop sample (invented data): phrases.json with labels in
English, German and Japanese, embeddings.json (4-D diagonal Gaussians drawn down the tree)
and tree.json. Deterministic: `python3 make_sample.py` rewrites the same files."""
import json
import random

# id, parent, en, de, ja (None: no label in that language)
TAGS = [
    ("garden-supplies", None, "garden supplies", "Gartenbedarf", "園芸用品"),
    ("plants", "garden-supplies", "plants", "Pflanzen", "植物"),
    ("succulents", "plants", "succulents", "Sukkulenten", "多肉植物"),
    ("cactus", "succulents", "cactus", "Kaktus", "サボテン"),
    ("aloe", "succulents", "aloe", "Aloe", "アロエ"),
    ("houseplants", "plants", "houseplants", "Zimmerpflanzen", "観葉植物"),
    ("fern", "houseplants", "fern", "Farn", "シダ"),
    ("tools", "garden-supplies", "tools", "Werkzeuge", "道具"),
    ("pruning-shears", "tools", "pruning shears", "Gartenschere", "剪定ばさみ"),
    ("watering-can", "tools", "watering can", "Gießkanne", "じょうろ"),
    ("compost-and-soil", "garden-supplies", "compost and soil", "Erde und Kompost", "土と堆肥"),
    ("peat-free-compost", "compost-and-soil", "peat free compost", "torffreier Kompost", "ピートフリー堆肥"),
    ("pest-control", "garden-supplies", "pest control", "Schädlingsbekämpfung", "害虫駆除"),
    ("slug-pellets", "pest-control", "slug pellets", "Gift", "ナメクジ駆除剤"),
    ("gifts", "garden-supplies", "gift", "Geschenk", "ギフト"),
    ("gift-voucher", "gifts", "gift voucher", "Gutschein", None),
]

rng = random.Random(21)
D = 4
mean, var = {}, {}
for tid, parent, *_ in TAGS:
    if parent is None:
        mean[tid] = [0.0] * D
        var[tid] = [4.0] * D
    else:
        axis = rng.randrange(D)
        pm, pv = mean[parent], var[parent]
        m = [pm[k] + rng.gauss(0, 0.3) * pv[k] ** 0.5 for k in range(D)]
        m[axis] += rng.choice([-1, 1]) * 1.5 * pv[axis] ** 0.5
        mean[tid] = [round(x, 4) for x in m]
        var[tid] = [round(pv[k] * (0.3 if k == axis else 0.6), 5) for k in range(D)]

phrases = []
for tid, _, en, de, ja in TAGS:
    labels = {"en": en, "de": de}
    if ja is not None:
        labels["ja"] = ja
    phrases.append({"id": tid, "labels": labels})
with open("phrases.json", "w", encoding="utf-8") as f:
    json.dump(phrases, f, ensure_ascii=False, indent=2)
    f.write("\n")
with open("embeddings.json", "w") as f:
    json.dump(
        {
            "covariance": "diagonal",
            "means": [mean[t[0]] for t in TAGS],
            "variances": [var[t[0]] for t in TAGS],
        },
        f,
        indent=1,
    )
    f.write("\n")
with open("tree.json", "w") as f:
    json.dump(
        {"root": TAGS[0][0], "parent": {t[0]: t[1] for t in TAGS if t[1]}},
        f,
        indent=2,
        sort_keys=True,
    )
    f.write("\n")
