#!/usr/bin/env python3
"""Records the guard corpus: real PyTorch (CPU) nights on data sets scikit-learn ships.

Each night is one trainer at one fixed recipe, printing what a user's trainer prints: one JSON
line per optimiser step ({"step", "epoch", "loss", "lr"}) and one per epoch with the held-out
loss ({"step", "epoch", "val_loss", "val_acc"}). Healthy nights keep a rate that trains well;
diverging nights are the same trainers pushed over the edge on purpose (a rate far too large
from the start, or multiplied at a known step), and their first line names the step where the
trouble was caused ({"corpus_onset": step}), so replays can measure the detection delay.

Usage: /usr/bin/python3 record.py OUT_DIR   (Debian's python3-torch and python3-sklearn)
The recipes are listed in NIGHTS below; "held_out" nights are never looked at while tuning the
presets. One thread, fixed seeds: a rerun on the same library versions gives the same lines.
"""
import json
import math
import os
import sys

import numpy as np
import torch
from sklearn import datasets
from sklearn.model_selection import train_test_split
from sklearn.preprocessing import StandardScaler

torch.set_num_threads(1)


def load(name):
    if name == "diabetes":
        x, y = datasets.load_diabetes(return_X_y=True)
        y = (y - y.mean()) / y.std()
        return x, y.astype(np.float32), 0
    x, y = getattr(datasets, "load_" + name)(return_X_y=True)
    return x, y, int(y.max()) + 1


def model(kind, d_in, classes, seed):
    torch.manual_seed(seed)
    out = classes if classes else 1
    if kind == "mlp":
        return torch.nn.Sequential(torch.nn.Linear(d_in, 64), torch.nn.ReLU(),
                                   torch.nn.Linear(64, 64), torch.nn.ReLU(),
                                   torch.nn.Linear(64, out))
    if kind == "cnn":  # digits as 8x8 images
        return torch.nn.Sequential(torch.nn.Unflatten(1, (1, 8, 8)),
                                   torch.nn.Conv2d(1, 16, 3, padding=1), torch.nn.ReLU(),
                                   torch.nn.MaxPool2d(2),
                                   torch.nn.Conv2d(16, 32, 3, padding=1), torch.nn.ReLU(),
                                   torch.nn.Flatten(), torch.nn.Linear(32 * 16, out))
    raise ValueError(kind)


def night(out, data, kind, opt, lr, seed, steps, batch, jump_at=None, jump=1.0, onset=None):
    x, y, classes = load(data)
    xtr, xva, ytr, yva = train_test_split(x, y, test_size=0.25, random_state=seed,
                                          stratify=y if classes else None)
    sc = StandardScaler().fit(xtr)
    xtr = torch.tensor(sc.transform(xtr), dtype=torch.float32)
    xva = torch.tensor(sc.transform(xva), dtype=torch.float32)
    if classes:
        ytr, yva = torch.tensor(ytr), torch.tensor(yva)
        loss_fn = torch.nn.CrossEntropyLoss()
    else:
        ytr = torch.tensor(ytr).unsqueeze(1)
        yva = torch.tensor(yva).unsqueeze(1)
        loss_fn = torch.nn.MSELoss()
    net = model(kind, xtr.shape[1], classes, seed)
    if opt == "sgd":
        o = torch.optim.SGD(net.parameters(), lr=lr, momentum=0.9)
    else:
        o = torch.optim.Adam(net.parameters(), lr=lr)
    g = torch.Generator().manual_seed(seed)
    n = xtr.shape[0]
    step, epoch = 0, 0
    with open(out, "w") as f:
        if onset is not None or jump_at is not None:
            f.write(json.dumps({"corpus_onset": onset if onset is not None else jump_at}) + "\n")
        while step < steps:
            perm = torch.randperm(n, generator=g)
            for i in range(0, n - batch + 1, batch):
                if step == jump_at:
                    for pg in o.param_groups:
                        pg["lr"] *= jump
                idx = perm[i:i + batch]
                net.train()
                o.zero_grad()
                loss = loss_fn(net(xtr[idx]), ytr[idx])
                loss.backward()
                o.step()
                step += 1
                v = loss.item()
                f.write(json.dumps({"step": step, "epoch": epoch, "loss": float("%.5g" % v)
                                    if math.isfinite(v) else str(v),
                                    "lr": float("%.4g" % o.param_groups[0]["lr"])}) + "\n")
                if step >= steps:
                    break
            epoch += 1
            net.eval()
            with torch.no_grad():
                pv = net(xva)
                vl = loss_fn(pv, yva).item()
                line = {"step": step, "epoch": epoch,
                        "val_loss": float("%.5g" % vl) if math.isfinite(vl) else str(vl)}
                if classes:
                    line["val_acc"] = float("%.4g" % (pv.argmax(1) == yva).float().mean().item())
                f.write(json.dumps(line) + "\n")


# (file name, data, model, optimiser, rate, seed, steps, batch, extra)
NIGHTS = []
for seed in range(5):
    held = seed >= 3
    part = "held-out" if held else "tuning"
    NIGHTS += [
        (f"{part}/healthy/digits-mlp-sgd0.05-s{seed}", "digits", "mlp", "sgd", 0.05, seed, 2500, 32, {}),
        (f"{part}/healthy/digits-cnn-sgd0.02-s{seed}", "digits", "cnn", "sgd", 0.02, seed, 2500, 32, {}),
        (f"{part}/healthy/wine-mlp-adam0.001-s{seed}", "wine", "mlp", "adam", 0.001, seed, 1500, 16, {}),
        (f"{part}/healthy/cancer-mlp-sgd0.01-s{seed}", "breast_cancer", "mlp", "sgd", 0.01, seed, 2000, 32, {}),
        (f"{part}/healthy/diabetes-mlp-adam0.003-s{seed}", "diabetes", "mlp", "adam", 0.003, seed, 2000, 32, {}),
    ]
for seed in (0, 1, 2):
    NIGHTS += [
        (f"tuning/healthy/digits-mlp-adam0.003-s{seed}", "digits", "mlp", "adam", 0.003, seed, 2500, 64, {}),
        (f"tuning/healthy/iris-mlp-sgd0.05-s{seed}", "iris", "mlp", "sgd", 0.05, seed, 1500, 16, {}),
    ]
for seed in (3, 4):
    NIGHTS += [
        (f"held-out/healthy/digits-cnn-adam0.001-s{seed}", "digits", "cnn", "adam", 0.001, seed, 2500, 64, {}),
        (f"held-out/healthy/iris-mlp-adam0.01-s{seed}", "iris", "mlp", "adam", 0.01, seed, 1500, 16, {}),
    ]
# Deliberately diverging: the same trainers with the rate multiplied at a known step, or far too
# large from the first step (onset 1).
for seed in range(4):
    part = "held-out" if seed >= 2 else "tuning"
    NIGHTS += [
        (f"{part}/diverging/digits-mlp-sgd0.05-x40at800-s{seed}", "digits", "mlp", "sgd", 0.05, seed, 1500, 32, {"jump_at": 800, "jump": 40.0}),
        (f"{part}/diverging/digits-cnn-sgd0.02-x100at1000-s{seed}", "digits", "cnn", "sgd", 0.02, seed, 1600, 32, {"jump_at": 1000, "jump": 100.0}),
        (f"{part}/diverging/cancer-mlp-sgd0.01-x300at600-s{seed}", "breast_cancer", "mlp", "sgd", 0.01, seed, 1200, 32, {"jump_at": 600, "jump": 300.0}),
        (f"{part}/diverging/diabetes-mlp-adam0.003-x100at700-s{seed}", "diabetes", "mlp", "adam", 0.003, seed, 1200, 32, {"jump_at": 700, "jump": 100.0}),
        (f"{part}/diverging/wine-mlp-sgd3-s{seed}", "wine", "mlp", "sgd", 3.0, seed, 600, 16, {"onset": 1}),
    ]
# Stuck at chance level: a rate far too small for the night, the loss stays near ln(classes).
for seed in range(2):
    part = "held-out" if seed >= 1 else "tuning"
    NIGHTS += [
        (f"{part}/stuck/digits-mlp-sgd1e-5-s{seed}", "digits", "mlp", "sgd", 1e-5, seed, 1500, 32, {}),
    ]

if __name__ == "__main__":
    root = sys.argv[1]
    only = sys.argv[2] if len(sys.argv) > 2 else ""
    for name, data, kind, opt, lr, seed, steps, batch, extra in NIGHTS:
        if only not in name:
            continue
        path = os.path.join(root, name + ".jsonl")
        os.makedirs(os.path.dirname(path), exist_ok=True)
        night(path, data, kind, opt, lr, seed, steps, batch, **extra)
        print(path, flush=True)
