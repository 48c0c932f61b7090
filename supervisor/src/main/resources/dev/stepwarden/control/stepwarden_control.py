"""stepwarden_control: the trainer's side of the stepwarden control file (standard library only).

Copy this one file next to your training script (`stepwarden helper python > stepwarden_control.py`).

    from stepwarden_control import Control
    control = Control(default_lr=0.1)          # reads STEPWARDEN_CONTROL from the environment
    for step, batch in enumerate(loader, 1):
        lr = control.rate()                    # cheap: one stat() call, the file is read on change
        for g in optimizer.param_groups: g["lr"] = lr
        print(json.dumps({"step": step, "loss": loss, **control.confirmation()}), flush=True)

Protocol: the supervisor replaces the JSON file named by STEPWARDEN_CONTROL atomically (write, then
rename) with {"revision": 4, "protocol": 1, "learning_rate": 0.025, ...}. `rate()` returns the
newest rate; `confirmation()` gives {"lr": ..., "applied_revision": ...} for your metric line,
which is how the supervisor confirms the change. `checkpoint_requested()` is true once per request when the
supervisor is about to be pre-empted and asks for a checkpoint now. Without STEPWARDEN_CONTROL
(running unsupervised) everything still works and the rate stays `default_lr`. A missing,
half-written or invalid file is ignored (the last good rate stays) with one warning on stderr.

This copy follows control protocol PROTOCOL (`python3 stepwarden_control.py` prints it). A control
file of a newer protocol gives one warning on stderr: regenerate this file with the supervisor
that runs the job (`stepwarden --version` names its protocol).
"""

import json
import os
import sys
import time

__all__ = ["Control", "PROTOCOL"]

# The control-file protocol this copy follows; the supervisor writes it as "protocol".
PROTOCOL = 1


class Control:
    """Polls the control file by modification time and hands back the current learning rate."""

    def __init__(self, default_lr, path=None, min_interval=0.0, rate_key="lr"):
        """default_lr: the rate until the supervisor says otherwise.
        path: the control file (default: the STEPWARDEN_CONTROL environment variable).
        min_interval: seconds between two looks at the file (0: look on every call).
        rate_key: the key confirmation() uses for the rate, matching read.rate in the guard file."""
        self._lr = float(default_lr)
        self._path = path if path is not None else os.environ.get("STEPWARDEN_CONTROL") or None
        self._min_interval = float(min_interval)
        self._rate_key = rate_key
        self._stamp = None
        self._last_look = None
        self._revision = 0
        self._applied = 0
        self._checkpoint_seen = 0
        self._checkpoint_pending = False
        self._warned = set()

    @property
    def path(self):
        return self._path

    @property
    def applied_revision(self):
        """The revision whose rate rate() handed out last (0: none yet)."""
        return self._applied

    def rate(self):
        """The learning rate in force now; looks at the file when it changed."""
        self._poll()
        self._applied = self._revision
        return self._lr

    def confirmation(self):
        """Keys to add to your metric line: the rate in use and the applied revision."""
        out = {self._rate_key: self._lr}
        if self._applied > 0:
            out["applied_revision"] = self._applied
        return out

    def __getattr__(self, name):
        if name == "report":  # the earlier name of confirmation(), refused with the new one
            raise AttributeError("Control.report() is now Control.confirmation(): it gives the"
                                 " keys that confirm a rate change on your metric line")
        raise AttributeError(name)

    def checkpoint_requested(self):
        """True once for each checkpoint request of the supervisor (pre-emption): save now."""
        self._poll()
        if self._checkpoint_pending:
            self._checkpoint_pending = False
            return True
        return False

    def _poll(self):
        if self._path is None:
            return
        now = time.monotonic()
        if self._last_look is not None and now - self._last_look < self._min_interval:
            return
        self._last_look = now
        try:
            st = os.stat(self._path)
        except OSError:
            return  # no file yet: no intervention so far
        # The inode changes on every rename, even within one clock tick with the same size.
        stamp = (st.st_ino, st.st_mtime_ns, st.st_size)
        if stamp == self._stamp:
            return
        try:
            with open(self._path, "r", encoding="utf-8") as f:
                data = json.load(f)
            revision = int(data["revision"])
            lr = float(data["learning_rate"])
            if not (lr > 0 and lr != float("inf")):
                raise ValueError("learning_rate must be a positive number, not %r" % lr)
        except (OSError, ValueError, KeyError, TypeError) as e:
            key = (stamp, str(e))
            if key not in self._warned:
                self._warned.add(key)
                sys.stderr.write("stepwarden_control: ignoring %s: %s\n" % (self._path, e))
            return
        self._stamp = stamp
        protocol = data.get("protocol", 1)
        if isinstance(protocol, int) and protocol > PROTOCOL and "protocol" not in self._warned:
            self._warned.add("protocol")
            sys.stderr.write("stepwarden_control: %s is written in control protocol %d but this"
                             " copy of stepwarden_control.py follows protocol %d: replace it with"
                             " the output of `stepwarden helper python`\n"
                             % (self._path, protocol, PROTOCOL))
        if revision > self._revision:
            self._revision = revision
            self._lr = lr
            request = data.get("checkpoint_request")
            if isinstance(request, int) and request > self._checkpoint_seen:
                self._checkpoint_seen = request
                self._checkpoint_pending = True


if __name__ == "__main__":
    print("stepwarden_control control protocol %d" % PROTOCOL)
