#!/usr/bin/env python3
"""A hyperparameter search written outside .NET, for the walkthrough in README.md.

An invented scenario with data made by this script: a tea room predicts whether a table orders a second pot
from two readings (minutes seated, cups already poured). The "model" is a logistic score with two
hyperparameters, a weight on the minutes and a decision threshold; the search tries a grid of them and, as a
search run anywhere would, scores each configuration on one validation set. It writes what the accountant needs:

  out/labels.csv           id,label for the validation set (the holdout)
  out/preds-NN.csv         id,prediction for each configuration
  out/looks.jsonl          one line per configuration: its hyperparameters and its predictions file

Only the standard library is used, so it runs on any Python 3.
"""
import json
import math
import os
import random

random.seed(7)
here = os.path.dirname(os.path.abspath(__file__))
out = os.path.join(here, "out")
os.makedirs(out, exist_ok=True)


def draw(n):
    rows = []
    for i in range(n):
        minutes = random.uniform(10, 120)
        cups = random.randint(1, 6)
        p = 1 / (1 + math.exp(-(0.03 * (minutes - 60) + 0.5 * (cups - 3))))
        rows.append((f"table-{i:04d}", minutes, cups, 1 if random.random() < p else 0))
    return rows


validation = draw(600)
with open(os.path.join(out, "labels.csv"), "w", newline="") as f:
    f.write("id,label\n")
    for row_id, _, _, label in validation:
        f.write(f"{row_id},{label}\n")

looks = []
number = 0
for weight in (0.005, 0.01, 0.02, 0.03, 0.05):
    for threshold in (0.3, 0.4, 0.5, 0.6):
        number += 1
        name = f"preds-{number:02d}.csv"
        with open(os.path.join(out, name), "w", newline="") as f:
            f.write("id,prediction\n")
            for row_id, minutes, cups, _ in validation:
                score = 1 / (1 + math.exp(-(weight * (minutes - 60) + 0.5 * (cups - 3))))
                f.write(f"{row_id},{1 if score > threshold else 0}\n")
        looks.append({"configuration": {"model": "logistic-score", "minutesWeight": weight, "threshold": threshold},
                      "predictions": name, "search": "python-grid"})

with open(os.path.join(out, "looks.jsonl"), "w") as f:
    for look in looks:
        f.write(json.dumps(look) + "\n")

print(f"wrote {len(looks)} configurations' predictions for {len(validation)} validation rows to {out}")
