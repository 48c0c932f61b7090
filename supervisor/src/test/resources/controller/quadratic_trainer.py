"""A trainer for the controller tests (our own scenario): noisy gradient descent on the quadratic
loss 0.5 * sum(h_i * w_i^2), curvatures h from 0.1 to 1. Plain gradient descent on a quadratic
is stable for rates below 2 / max(h) and fastest near 1 / max(h) (LeCun, Bottou, Orr and Mueller
1998, Efficient BackProp, s5.1), so the loss a rate reaches is known in advance. It follows the
control file through the shipped helper (stepwarden_control.py next to it), prints one JSON line
per step and, with --no-loss, prints its loss under another key than the guard file reads.
"""
import argparse
import json
import random
import time

from stepwarden_control import Control

p = argparse.ArgumentParser()
p.add_argument("--lr", type=float, required=True)
p.add_argument("--steps", type=int, default=400)
p.add_argument("--delay", type=float, default=0.004)
p.add_argument("--noise", type=float, default=0.01)
p.add_argument("--no-loss", action="store_true")
a = p.parse_args()

control = Control(default_lr=a.lr)
rng = random.Random(7)
h = [0.1 + 0.9 * i / 9 for i in range(10)]
w = [1.0] * 10
for step in range(1, a.steps + 1):
    lr = control.rate()
    w = [wi - lr * (hi * wi + rng.gauss(0, a.noise)) for wi, hi in zip(w, h)]
    loss = 0.5 * sum(hi * wi * wi for wi, hi in zip(w, h))
    if loss > 1e6:
        loss = float("inf")
    line = {"step": step, ("xent" if a.no_loss else "loss"): loss}
    line.update(control.confirmation())
    print(json.dumps(line), flush=True)
    if loss == float("inf"):
        break
    time.sleep(a.delay)
