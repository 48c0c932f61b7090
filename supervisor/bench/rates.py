"""What the supervisor costs at the rates trainers really print, and how fast it reacts.

Called by rates.sh (which builds the jar); see there for the usage. Everything is measured side by
side in one run of this script:

1. CPU added per line at each RATE (all rates and the idle night at once, each with its own
   trees, so that they share one state of the machine): three process trees run at the same time
   on the same paced
   trainer (JSON lines, one write per line, as `print(..., flush=True)` does): the trainer alone
   (stdout to /dev/null), `trainer | tee FILE`, and `stepwarden run -- trainer` (echoing to
   /dev/null, as tee does). The CPU of every thread of each process is read from
   /proc/PID/task/*/schedstat (nanoseconds) at the start and the end of a steady window that
   begins WARM seconds after the launch, so the JVM's start-up and the trainer's own start are
   outside it. The reader's CPU (tee; the run's JVM) per 10,000 lines is the headline; the
   trainer's own extra (its CPU minus the lone trainer's: writing into a pipe with a reader that
   wakes) is given beside it: on a busy machine it is mostly noise (two copies of one trainer
   differ by more than it), which is why it is not subtracted from a whole-tree total.
   A thread that ends inside the window takes its CPU with it (the JVM keeps its threads).
2. An idle night: `stepwarden run` of a trainer that prints one line and then sleeps, beside the
   same sleeper alone; CPU of the window scaled to one hour.
3. Reaction: a trainer at 200 and 5,000 lines/s prints a NaN loss every BAD_EVERY seconds and
   notes CLOCK_MONOTONIC (time.monotonic_ns) just before that write; the guard `breaks` scales
   the rate. A separate poller process stats the control file every POLL_US microseconds and
   notes the monotonic time at which its inode changes (the supervisor replaces it by rename).
   Latency = change seen - bad line written; resolution: the poll interval plus the poller's
   wake-up delay. The trainer follows the control file through the shipped helper, so each change
   is confirmed as a real trainer confirms it; a bad line is matched to its control revision
   through the audit log (decision step -> outcome revision). Separately, STOP_RUNS runs per rate
   whose guard `stop`s at the first NaN (printed STOP_AFTER seconds after the trainer's start):
   the trainer notes the monotonic time at which its SIGTERM handler runs.
4. Resident memory: VmRSS and VmHWM of the supervisor's JVM at the end of each window.
"""
import itertools
import json
import os
import signal
import statistics
import subprocess
import sys
import threading
import time

JAR, JVM_OPTS, WORK = sys.argv[1], sys.argv[2].split(), sys.argv[3]
RATES = [int(r) for r in os.environ.get("RATES", "10,100,500,5000").split(",")]
WARM = float(os.environ.get("WARM", "30"))
WINDOW = float(os.environ.get("WINDOW", "30"))
LAT_WARM = float(os.environ.get("LAT_WARM", "10"))
IDLE = float(os.environ.get("IDLE", "60"))
LAT_SECONDS = float(os.environ.get("LAT_SECONDS", "30"))
BAD_EVERY = float(os.environ.get("BAD_EVERY", "0.5"))
STOP_RUNS = int(os.environ.get("STOP_RUNS", "10"))
STOP_AFTER = float(os.environ.get("STOP_AFTER", "4"))
POLL_US = int(os.environ.get("POLL_US", "200"))
PY = sys.executable
HERE = os.path.dirname(os.path.abspath(__file__))
HELPER_DIR = os.path.join(os.path.dirname(HERE), "src/main/resources/dev/stepwarden/control")

TRAINER = r'''
import json, math, os, signal, sys, time
rate, seconds, bad_every, mode = float(sys.argv[1]), float(sys.argv[2]), float(sys.argv[3]), sys.argv[4]
out = sys.stdout
marks = open(os.environ["MARKS"], "w") if "MARKS" in os.environ else None
if mode == "helper":
    sys.path.insert(0, os.environ["HELPER_DIR"])
    from stepwarden_control import Control
    control = Control(default_lr=1.0)
else:
    control = None
def term(signum, frame):
    t = time.monotonic_ns()
    if marks:
        marks.write("term %d\n" % t); marks.flush()
    sys.exit(143)
signal.signal(signal.SIGTERM, term)
if mode == "idle":
    out.write(json.dumps({"step": 0, "loss": 1.0}) + "\n"); out.flush()
    time.sleep(seconds)
    sys.exit(0)
t0 = time.monotonic(); n = int(rate * seconds); next_bad = bad_every if bad_every > 0 else None
for i in range(n):
    due = t0 + i / rate
    now = time.monotonic()
    if due > now:
        time.sleep(due - now)
    loss = 2.0 * math.exp(-i / 50000.0) + 1e-3 * ((i * 7919) % 101)
    rec = {"step": i, "epoch": i // 10000, "loss": loss}
    bad = next_bad is not None and now - t0 >= next_bad
    if bad:
        rec["loss"] = float("nan")
        next_bad += bad_every
    if control is not None:
        control.rate()
        rec.update(control.confirmation())
    line = json.dumps(rec) + "\n"
    if bad and marks:
        t = time.monotonic_ns()
        out.write(line); out.flush()
        marks.write("bad %d %d\n" % (t, i)); marks.flush()
    else:
        out.write(line); out.flush()
'''

POLLER = r'''
import json, os, sys, time
path, interval, stop = sys.argv[1], int(sys.argv[2]) / 1e6, sys.argv[3]
last = None; out = open(sys.argv[4], "w")
while not os.path.exists(stop):
    try:
        ino = os.stat(path).st_ino
    except OSError:
        ino = None
    if ino != last and ino is not None:
        t = time.monotonic_ns()
        try:
            with open(path) as f:
                out.write("%d %d\n" % (t, json.load(f)["revision"])); out.flush()
        except (OSError, ValueError, KeyError):
            pass
    last = ino
    time.sleep(interval)
'''

GUARDS = """run: {{ name: rates, learning_rate: 1.0 }}
read: {{ from: stdout, series: {{ train: loss }} }}
guards:
  - name: broken
    when: {{ breaks: {{ series: train }} }}
    do: {action}
  - name: blow-up
    when: {{ rises: {{ series: train, above_level: 3.0, samples: 3 }} }}
    do: {{ scale: 0.5 }}
limits:
  learning_rate: {{ min: 0, max: 10 }}
"""


def write(path, text):
    with open(path, "w") as f:
        f.write(text)
    return path


trainer_py = write(os.path.join(WORK, "trainer.py"), TRAINER)
poller_py = write(os.path.join(WORK, "poller.py"), POLLER)
steer_yaml = write(os.path.join(WORK, "steer.yaml"), GUARDS.format(action="{ scale: 0.5 }"))
stop_yaml = write(os.path.join(WORK, "stop.yaml"), GUARDS.format(action="stop"))
runs = itertools.count(1)  # one run directory each, also from the threads of the CPU part


def java_run(guards, argv, env=None, stdout=subprocess.DEVNULL):
    run_dir = os.path.join(WORK, "run%d" % next(runs))
    # Not --quiet: the run echoes the trainer's lines to its stdout (/dev/null), as tee does.
    cmd = ["java", *JVM_OPTS, "-jar", JAR, "run", "--rules", guards,
           "--run-dir", run_dir, "--", *argv]
    p = subprocess.Popen(cmd, stdout=stdout, stderr=open(run_dir + ".err", "w"),
                         env=env or os.environ)
    return p, run_dir


def children():
    """ppid -> [pid] over the whole machine, read once per sample."""
    kids = {}
    for d in os.listdir("/proc"):
        if d.isdigit():
            try:
                with open("/proc/%s/stat" % d) as f:
                    s = f.read()
                ppid = int(s[s.rindex(")") + 2:].split()[1])
                kids.setdefault(ppid, []).append(int(d))
            except (OSError, ValueError):
                pass
    return kids


def tree_cpu_ns(roots, kids):
    """CPU (ns) of every thread of every process under the roots, read now."""
    total, todo, seen = 0, list(roots), set()
    while todo:
        pid = todo.pop()
        if pid in seen:
            continue
        seen.add(pid)
        todo.extend(kids.get(pid, []))
        try:
            for t in os.listdir("/proc/%d/task" % pid):
                try:
                    with open("/proc/%d/task/%s/schedstat" % (pid, t)) as f:
                        total += int(f.read().split()[0])
                except (OSError, ValueError):
                    pass
        except OSError:
            pass
    return total


def rss_mb(pid):
    vals = {}
    try:
        with open("/proc/%d/status" % pid) as f:
            for line in f:
                k, _, v = line.partition(":")
                if k in ("VmRSS", "VmHWM"):
                    vals[k] = int(v.split()[0]) / 1024
    except OSError:
        pass
    return vals.get("VmRSS", float("nan")), vals.get("VmHWM", float("nan"))


def own_cpu_ns(pid):
    return tree_cpu_ns([pid], {})


def cpu_round(rate, seconds, mode):
    """Three trees side by side. Returns (lines in window, window, CPU seconds of: the trainer
    alone, the trainer into tee, tee, the trainer under the run, the run's JVM), rss, hwm, exit."""
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    targv = [PY, trainer_py, str(rate), str(seconds), "0", mode]
    alone = subprocess.Popen(targv, stdout=subprocess.DEVNULL, env=env)
    t1 = subprocess.Popen(targv, stdout=subprocess.PIPE, env=env)
    tee = subprocess.Popen(["tee", os.path.join(WORK, "tee.out")], stdin=t1.stdout,
                           stdout=subprocess.DEVNULL)
    t1.stdout.close()
    run, _ = java_run(steer_yaml, targv, env)
    time.sleep(WARM)

    def sample():
        kids = children()
        trainer_under_run = kids.get(run.pid, [])
        return [own_cpu_ns(alone.pid), own_cpu_ns(t1.pid), own_cpu_ns(tee.pid),
                tree_cpu_ns(trainer_under_run, kids), own_cpu_ns(run.pid)]
    a0 = sample()
    w0 = time.monotonic()
    time.sleep(WINDOW if mode != "idle" else IDLE)
    a1 = sample()
    w = time.monotonic() - w0
    rss, hwm = rss_mb(run.pid)
    for p in (alone, t1, tee, run):
        p.wait()
    lines = rate * w if mode != "idle" else 0  # the trainer keeps its pace (absolute schedule)
    return lines, w, [(b - a) / 1e9 for a, b in zip(a0, a1)], rss, hwm, run.returncode


def pct(xs, q):
    xs = sorted(xs)
    if not xs:
        return float("nan")
    k = max(0, min(len(xs) - 1, int(round(q / 100 * (len(xs) - 1)))))
    return xs[k]


def reaction(rate):
    """Control-file replacement latencies (ms) at this rate, in one supervised run."""
    marks = os.path.join(WORK, "marks-%d.txt" % rate)
    seen = os.path.join(WORK, "seen-%d.txt" % rate)
    stop_flag = os.path.join(WORK, "stop-%d" % rate)
    env = dict(os.environ, PYTHONUNBUFFERED="1", MARKS=marks, HELPER_DIR=HELPER_DIR)
    run, run_dir = java_run(steer_yaml, [PY, trainer_py, str(rate), str(LAT_SECONDS + LAT_WARM),
                                         str(BAD_EVERY), "helper"], env)
    poller = subprocess.Popen([PY, poller_py, os.path.join(run_dir, "control.json"),
                               str(POLL_US), stop_flag, seen])
    run.wait()
    rss, hwm = float("nan"), float("nan")
    open(stop_flag, "w").close()
    poller.wait()
    # bad line (by its step) -> decision -> outcome's control revision -> when the poller saw it
    bads = [tuple(map(int, l.split()[1:])) for l in open(marks) if l.startswith("bad ")]
    seen_at = {}
    for l in open(seen):
        if l.strip():
            t, rev = map(int, l.split())
            seen_at.setdefault(rev, t)
    step_seq, seq_rev = {}, {}
    for l in open(os.path.join(run_dir, "audit.jsonl")):
        r = json.loads(l)
        if r.get("type") == "decision":
            step_seq[r["step"]] = r["seq"]
        elif r.get("type") == "outcome" and "revision" in r:
            seq_rev[r["decision_seq"]] = r["revision"]
    lat, warm_lat, missed = [], [], 0
    for b, step in bads:
        rev = seq_rev.get(step_seq.get(step))
        if rev not in seen_at:
            missed += 1
        elif b - bads[0][0] < LAT_WARM * 1e9:  # the JVM's warm-up: apart, as the rest of a night is warm
            warm_lat.append((seen_at[rev] - b) / 1e6)
        else:
            lat.append((seen_at[rev] - b) / 1e6)
    return lat, warm_lat, missed, run.returncode


def stop_latency(rate):
    out = []
    for k in range(STOP_RUNS):
        marks = os.path.join(WORK, "stopmarks-%d-%d.txt" % (rate, k))
        env = dict(os.environ, PYTHONUNBUFFERED="1", MARKS=marks, HELPER_DIR=HELPER_DIR)
        run, _ = java_run(stop_yaml, [PY, trainer_py, str(rate), "60", str(STOP_AFTER), "helper"],
                          env)
        run.wait()
        m = {l.split()[0]: l.split()[1] for l in open(marks) if l.strip()}
        if "bad" in m and "term" in m:
            out.append((int(m["term"]) - int(m["bad"])) / 1e6)
    return out


def uptime():
    return open("/proc/loadavg").read().split()[:3]


def fmt_ms(xs):
    if not xs:
        return "n=0"
    return "p50 %.1f ms, p99 %.1f ms, max %.1f ms (n=%d)" % (
        statistics.median(xs), pct(xs, 99), max(xs), len(xs))


print("stepwarden, paced trainer (one JSON line per write); load average at start: %s"
      % " ".join(uptime()), flush=True)
# All rates and the idle night at once (each its own trio of trees): one steady window for all.
jobs = {rate: None for rate in RATES}
if IDLE > 0:
    jobs["idle"] = None


def job(key):
    if key == "idle":
        jobs[key] = cpu_round(1, WARM + IDLE + 2, "idle")
    else:
        jobs[key] = cpu_round(key, WARM + WINDOW + 2, "plain")


threads = [threading.Thread(target=job, args=(k,)) for k in jobs]
for t in threads:
    t.start()
for t in threads:
    t.join()
rows = []
for rate in RATES:
    n, w, (alone, t_tee, tee, t_run, run), rss, hwm, rc = jobs[rate]
    rows.append((rate, n, tee, run, t_tee - alone, t_run - alone, hwm))
    print("%5d lines/s, %.1f s window, %d lines: CPU of tee %.3f s, of the run's JVM %.3f s "
          "(%.3f and %.3f s per 10,000 lines, ratio %.2f); the trainer itself: alone %.3f s, "
          "into tee %+.3f s, under the run %+.3f s; RSS %.0f MB (peak %.0f); exit %s"
          % (rate, w, n, tee, run, tee / n * 1e4, run / n * 1e4,
             run / tee if tee > 0 else float("nan"), alone, t_tee - alone, t_run - alone, rss,
             hwm, rc), flush=True)
idle_per_hour = float("nan")
if IDLE > 0:
    _, w, (_a, _tt, _tee, _tr, run), rss, hwm, rc = jobs["idle"]
    idle_per_hour = run / w * 3600
    print("idle night: %.1f s window, the run's JVM used %.3f s CPU = %.2f s per hour; "
          "RSS %.0f MB" % (w, run, idle_per_hour, rss), flush=True)
print("load average after the CPU part: %s" % " ".join(uptime()), flush=True)

react = {}
for rate in ((200, 5000) if LAT_SECONDS > 0 else ()):
    lat, warm_lat, missed, rc = reaction(rate)
    stops = stop_latency(rate)
    react[rate] = (lat, stops)
    print("%5d lines/s: NaN line -> control file replaced: %s; (first %.0f s: %s); "
          "unmatched %d; NaN line -> SIGTERM of a stop: %s"
          % (rate, fmt_ms(lat), LAT_WARM, fmt_ms(warm_lat), missed, fmt_ms(stops)), flush=True)

print()
print("load average at end: %s" % " ".join(uptime()))
print()
print("| lines/s | `tee FILE` (CPU per 10,000 lines) | `stepwarden run` (its JVM) | ratio |"
      " the trainer's own extra, into tee / under the run | RSS of the run |")
print("|---|---|---|---|---|---|")
for rate, n, t, r, xt, xr, hwm in rows:
    print("| %s | %.3f s | %.3f s | %.2fx | %+.3f s / %+.3f s | %.0f MB |" % (
        format(rate, ","), t / n * 1e4, r / n * 1e4, r / t if t > 0 else float("nan"),
        xt / n * 1e4, xr / n * 1e4, hwm))
print("| idle (one line, then silence) | — | %.2f s per hour | — | — | |" % idle_per_hour)
for rate, (lat, stops) in react.items():
    print("| reaction at %s lines/s | NaN -> control file: %s | NaN -> SIGTERM of a stop: %s"
          " | | | |" % (format(rate, ","), fmt_ms(lat), fmt_ms(stops)))
