"""The control-quality benchmark's trainers: small PyTorch classifiers on data sets that Debian's
python3-sklearn ships (our own tasks; CPU only; seconds per run).

Tasks (--task):
  digits-mlp  handwritten digits (8x8 images, 1797 rows, 10 classes), 64-64-10 ReLU MLP, plain SGD
  digits-cnn  the same digits as 1x8x8 images, two 3x3 conv layers, SGD with momentum 0.9
  cancer-mlp  breast cancer Wisconsin diagnostic (569 rows, 30 features, 2 classes), 30-16-2
              ReLU MLP, plain SGD

Each seed draws its own split of the rows: 60 % training, 20 % validation, 20 % test. The
trainer prints one JSON line per step ({"step", "loss", "lr", "applied_revision"}) and one per
epoch ({"step", "epoch", "val_loss"}), then writes ckpt/step-NNNNNN.pt (write, then rename).

The held-out test split is the benchmark's, never the supervisor's: its loss is written, with
the validation loss and the checkpoint's SHA-256, to bench-checkpoints.jsonl in the working
directory, a file no guard file reads. The harness scores a night by the test loss of the
checkpoint stepwarden names (found by its hash). bench-steps.jsonl gets one line per launch with
the training steps it ran (compute in plain-run units).

Rate: the shipped helper (stepwarden_control.py on PYTHONPATH) in one of two ways, both the
README's protocol: --steer poll reads the control file before every step; --steer launch reads
it once at start (a trainer steered by restart: a new rate comes with a new launch). --plateau
instead lowers the rate in-process with PyTorch's ReduceLROnPlateau on the validation loss
(the comparison the benchmark reports), and never reads the control file.

  python3 control_quality_trainer.py --prepare DIR    # once: sklearn's CSVs -> DIR/*.npz
  python3 control_quality_trainer.py --task digits-mlp --data DIR --seed 1 --lr 0.1 \\
      --resume "" --epochs 20
"""
import argparse
import hashlib
import io
import json
import math
import os
import signal
import sys

p = argparse.ArgumentParser()
p.add_argument("--prepare", metavar="DIR")
p.add_argument("--task", choices=["digits-mlp", "digits-cnn", "cancer-mlp"])
p.add_argument("--data", metavar="DIR")
p.add_argument("--seed", type=int, default=1)
p.add_argument("--lr", type=float, default=0.1)
p.add_argument("--resume", default="")
p.add_argument("--epochs", type=int, default=20)
p.add_argument("--ckpt-dir", default="ckpt")
p.add_argument("--steer", choices=["poll", "launch"], default="poll")
p.add_argument("--plateau", action="store_true",
               help="ReduceLROnPlateau(factor=0.5, patience=2) on the validation loss")
a = p.parse_args()

DATASETS = {"digits-mlp": "digits", "digits-cnn": "digits", "cancer-mlp": "cancer"}

if a.prepare:
    # sklearn is imported only here: its import costs about as much as torch's.
    import numpy as np
    from sklearn.datasets import load_breast_cancer, load_digits
    os.makedirs(a.prepare, exist_ok=True)
    d = load_digits()
    np.savez(os.path.join(a.prepare, "digits.npz"), x=d.data / 16.0, y=d.target)
    c = load_breast_cancer()
    np.savez(os.path.join(a.prepare, "cancer.npz"), x=c.data, y=c.target)
    sys.exit(0)

import numpy as np
import torch
from torch import nn

torch.set_num_threads(1)
torch.manual_seed(a.seed)

raw = np.load(os.path.join(a.data, DATASETS[a.task] + ".npz"))
x_all = raw["x"].astype(np.float32)
y_all = raw["y"].astype(np.int64)
order = np.random.default_rng(1000 + a.seed).permutation(len(y_all))
n_train, n_val = int(0.6 * len(order)), int(0.2 * len(order))
tr, va, te = order[:n_train], order[n_train:n_train + n_val], order[n_train + n_val:]
if a.task == "cancer-mlp":  # features on very different scales: standardize on training rows
    mean, std = x_all[tr].mean(0), x_all[tr].std(0) + 1e-8
    x_all = (x_all - mean) / std
X = torch.from_numpy(x_all)
Y = torch.from_numpy(y_all)
if a.task == "digits-cnn":
    X = X.view(-1, 1, 8, 8)
classes = int(y_all.max()) + 1

if a.task == "digits-mlp":
    model = nn.Sequential(nn.Linear(64, 64), nn.ReLU(), nn.Linear(64, 10))
    momentum, batch = 0.0, 32
elif a.task == "digits-cnn":
    model = nn.Sequential(nn.Conv2d(1, 8, 3, padding=1), nn.ReLU(), nn.MaxPool2d(2),
                          nn.Conv2d(8, 16, 3, padding=1), nn.ReLU(), nn.MaxPool2d(2),
                          nn.Flatten(), nn.Linear(64, 10))
    momentum, batch = 0.9, 32
else:
    model = nn.Sequential(nn.Linear(30, 16), nn.ReLU(), nn.Linear(16, 2))
    momentum, batch = 0.0, 16
opt = torch.optim.SGD(model.parameters(), lr=a.lr, momentum=momentum)
loss_fn = nn.CrossEntropyLoss()
steps_per_epoch = math.ceil(len(tr) / batch)

control = None
if not a.plateau:
    from stepwarden_control import Control
    control = Control(default_lr=a.lr)
lr = control.rate() if control is not None else a.lr  # the launch's rate (the control file wins)

step, epoch = 0, 0
scheduler = None
if a.plateau:
    scheduler = torch.optim.lr_scheduler.ReduceLROnPlateau(opt, mode="min", factor=0.5,
                                                           patience=2)
if a.resume:
    state = torch.load(a.resume)
    model.load_state_dict(state["model"])
    opt.load_state_dict(state["opt"])
    step, epoch = state["step"], state["epoch"]
    if scheduler is not None and "scheduler" in state:
        scheduler.load_state_dict(state["scheduler"])
        lr = opt.param_groups[0]["lr"]
for g in opt.param_groups:
    g["lr"] = lr


def evaluate(rows):
    model.eval()
    with torch.no_grad():
        out = loss_fn(model(X[rows]), Y[rows]).item()
    model.train()
    return out


def number(v):
    return v if math.isfinite(v) else None


def save(val, test):
    """Records the checkpoint's hash and losses, then publishes it: a trainer stopped between the
    two leaves a record without a file, never a file the benchmark cannot score."""
    buf = io.BytesIO()
    torch.save({"model": model.state_dict(), "opt": opt.state_dict(), "step": step,
                "epoch": epoch, "scheduler": scheduler.state_dict() if scheduler else None}, buf)
    data = buf.getvalue()
    with open("bench-checkpoints.jsonl", "a") as f:
        f.write(json.dumps({"sha256": hashlib.sha256(data).hexdigest(), "step": step,
                            "epoch": epoch, "val_loss": number(val), "test_loss": number(test),
                            "lr": opt.param_groups[0]["lr"], "classes": classes}) + "\n")
    os.makedirs(a.ckpt_dir, exist_ok=True)
    name = os.path.join(a.ckpt_dir, "step-%06d.pt" % step)
    tmp = os.path.join(a.ckpt_dir, ".step-%06d.tmp" % step)
    with open(tmp, "wb") as f:
        f.write(data)
    os.replace(tmp, name)


ran = 0


def account(*_):
    with open("bench-steps.jsonl", "a") as f:
        f.write(json.dumps({"from_step": step - ran, "steps": ran,
                            "steps_per_epoch": steps_per_epoch}) + "\n")


def stop(*_):
    raise SystemExit(0)


signal.signal(signal.SIGTERM, stop)
try:
    while epoch < a.epochs:
        perm = torch.randperm(len(tr), generator=torch.Generator().manual_seed(a.seed * 1000 + epoch))
        for k in range(steps_per_epoch):
            if control is not None and a.steer == "poll":
                lr = control.rate()
                for g in opt.param_groups:
                    g["lr"] = lr
            rows = torch.from_numpy(tr)[perm[k * batch:(k + 1) * batch]]
            loss = loss_fn(model(X[rows]), Y[rows])
            opt.zero_grad()
            loss.backward()
            opt.step()
            step += 1
            ran += 1
            line = {"step": step, "loss": loss.item()}  # NaN stays NaN: a guard reads it
            line.update(control.confirmation() if control is not None
                        else {"lr": opt.param_groups[0]["lr"]})
            print(json.dumps(line), flush=True)
        epoch += 1
        val, test = evaluate(va), evaluate(te)
        print(json.dumps({"step": step, "epoch": epoch, "val_loss": val}), flush=True)
        if scheduler is not None:
            scheduler.step(val if math.isfinite(val) else float("inf"))
        save(val, test)
finally:
    account()
