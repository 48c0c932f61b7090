"""A toy trainer for the steering tests (invented behaviour, our own scenario).

The "loss" is a made-up curve, not a network: it falls as 1/(1 + step/50) and, when
--diverge-at is given and the rate is above --stable-below, grows tenfold per --growth-steps steps from that
step on. Validation is a constant plateau (so a plateau guard fires). Checkpoints are JSON files
{"step": N, "lr": R} written as a real trainer does: to a temporary file, then renamed over
ckpt/last.json (and, with --numbered, also ckpt/step-N.json).
"""
import argparse
import json
import os
import signal
import sys
import time

p = argparse.ArgumentParser()
p.add_argument("--lr", type=float, required=True)
p.add_argument("--resume", default="")
p.add_argument("--skip-batches", type=int, default=0)
p.add_argument("--attempt", type=int, default=1)
p.add_argument("--steps", type=int, default=100)
p.add_argument("--eval-every", type=int, default=20)
p.add_argument("--delay", type=float, default=0.02)
p.add_argument("--ckpt-dir", default="ckpt")
p.add_argument("--listen", action="store_true", help="use the control-file helper")
p.add_argument("--listen-by-hand", action="store_true",
               help="follow the control-file protocol without the helper")
p.add_argument("--term-delay", type=float, default=0.0,
               help="on TERM, go on training (and printing) this many seconds, then exit")
p.add_argument("--numbered", action="store_true")
p.add_argument("--diverge-at", type=int, default=-1)
p.add_argument("--stable-below", type=float, default=0.05)
p.add_argument("--growth-steps", type=float, default=10.0, help="steps per tenfold growth")
p.add_argument("--crash-at", type=int, default=-1, help="exit 1 there on attempt 1")
p.add_argument("--hang-at", type=int, default=-1, help="go silent there on attempt 1")
a = p.parse_args()



class ByHand:
    """The README's control-file protocol, followed without the helper: poll, apply, report."""

    def __init__(self, default_lr):
        self.lr = default_lr
        self.revision = 0
        self.seen = None

    def rate(self):
        path = os.environ.get("STEPWARDEN_CONTROL")
        try:
            st = os.stat(path)
        except (TypeError, OSError):
            return self.lr
        if (st.st_ino, st.st_mtime_ns) != self.seen:
            self.seen = (st.st_ino, st.st_mtime_ns)
            with open(path) as f:
                data = json.load(f)
            if data["revision"] > self.revision:
                self.revision = data["revision"]
                self.lr = float(data["learning_rate"])
        return self.lr

    def checkpoint_requested(self):
        return False

    def confirmation(self):
        return {"lr": self.lr, "applied_revision": self.revision}


control = None
if a.listen:
    sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
    from stepwarden_control import Control
    control = Control(default_lr=a.lr)
elif a.listen_by_hand:
    control = ByHand(a.lr)

stop_at = None
if a.term_delay > 0:
    def on_term(signum, frame):
        global stop_at
        if stop_at is None:
            stop_at = time.monotonic() + a.term_delay
    signal.signal(signal.SIGTERM, on_term)

step = 0
lr = a.lr
if a.resume:
    with open(a.resume) as f:
        step = json.load(f)["step"]
os.makedirs(a.ckpt_dir, exist_ok=True)
print("toy trainer: attempt %d from step %d at lr %g, skipping %d batches"
      % (a.attempt, step, lr, a.skip_batches), file=sys.stderr, flush=True)


def save(name):
    tmp = os.path.join(a.ckpt_dir, "." + name + ".tmp")
    with open(tmp, "w") as f:
        json.dump({"step": step, "lr": lr}, f)
    os.replace(tmp, os.path.join(a.ckpt_dir, name))


while step < a.steps:
    if stop_at is not None and time.monotonic() >= stop_at:
        save("last.json")  # the slow, orderly exit of a trainer that saves on TERM
        sys.exit(0)
    if control is not None:
        lr = control.rate()
        if control.checkpoint_requested():
            save("step-%06d.json" % step)
            print("toy trainer: checkpoint written on request at step %d" % step,
                  file=sys.stderr, flush=True)
    step += 1
    if a.attempt == 1 and step == a.crash_at:
        print("Traceback (most recent call last):\nMemoryError: simulated", file=sys.stderr,
              flush=True)
        sys.exit(1)
    if a.attempt == 1 and step == a.hang_at:
        time.sleep(3600)
    loss = 1.0 / (1.0 + step / 50.0)
    if a.diverge_at > 0 and step > a.diverge_at and lr >= a.stable_below:
        loss *= 10 ** ((step - a.diverge_at) / a.growth_steps)
    line = {"step": step, "loss": loss, "attempt": a.attempt}
    line.update(control.confirmation() if control is not None else {"lr": lr})
    print(json.dumps(line), flush=True)
    if step % a.eval_every == 0:
        print(json.dumps({"step": step, "val_loss": 0.5}), flush=True)
        save("last.json")
        if a.numbered:
            save("step-%06d.json" % step)
    time.sleep(a.delay)
print("toy trainer: done at step %d" % step, file=sys.stderr, flush=True)
