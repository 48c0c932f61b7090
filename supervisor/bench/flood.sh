#!/bin/sh
# Whole-process flood benchmark: the same generated JSON-lines file through
#   1. cat FILE | wc -l (the pipe's line rate) and 4., three interleaved rounds, medians
#   2. python3: for line in sys.stdin: json.loads(line)
#   3. IntakeFlood: cat FILE via the process layer -> intake -> guard engine (one JVM)
#   4. stepwarden run --rules G -- cat FILE           (the whole supervisor, run dir and all)
#   5. a Python trainer flooding stdout: to /dev/null, into | cat, and under stepwarden run (x3)
#   6. stepwarden run -- cat FILE FILE: peak resident memory after 2 x LINES samples
# Usage: supervisor/bench/flood.sh [LINES]   (default 5000000). Needs python3, /usr/bin/time.
set -eu
N=${1:-5000000}
HERE=$(cd "$(dirname "$0")" && pwd)
MOD=$(dirname "$HERE")
W=$(mktemp -d "${TMPDIR:-/tmp}/stepwarden-flood.XXXXXX")
trap 'rm -rf "$W"' EXIT
F="$W/metrics.jsonl"

cd "$MOD"
mvn -B -q -DskipTests package dependency:build-classpath -Dmdep.outputFile=target/flood.classpath \
  -Dmdep.includeScope=test >/dev/null
CP="target/test-classes:target/classes:$(cat target/flood.classpath)"
JAR=target/stepwarden.jar
# The supervisor's JVM as the README alias launches it: a small serial-collected heap (the
# intake allocates little and keeps bounded windows), so resident memory stays flat.
JVM=${STEPWARDEN_JVM_OPTS:--XX:+UseSerialGC -Xms32m -Xmx256m}
# ... with the class-data archive the build records next to the jar, as the README alias has it
# (the in-JVM harness runs from classes, so it does not get the archive).
RUNJVM="$JVM -XX:SharedArchiveFile=$MOD/target/stepwarden.jsa -Xlog:cds=off -Xlog:cds+dynamic=off"

python3 - "$N" "$F" <<'PY'
import json, math, random, sys
n, path = int(sys.argv[1]), sys.argv[2]
random.seed(1)
with open(path, "w") as f:
    for i in range(n):
        loss = 2.0 * math.exp(-i / (n / 5)) + 0.01 * random.random()
        f.write(json.dumps({"step": i, "epoch": i // 10000, "loss": loss, "lr": 0.001}) + "\n")
PY
echo "file: $F  lines: $N  bytes: $(wc -c < "$F")"

rate() { python3 -c "import sys; print(f'{int(sys.argv[1])/float(sys.argv[2]):,.0f} lines/s')" "$N" "$1"; }
secs() { /usr/bin/time -f %e "$@" 2>&1 >/dev/null | tail -1; }


T_PY=$( { /usr/bin/time -f %e python3 -c 'import sys, json
for line in sys.stdin: json.loads(line)' < "$F"; } 2>&1 | tail -1)
echo "python json.loads:    ${T_PY}s  $(rate "$T_PY")"

echo "IntakeFlood (process layer + intake + guards, one JVM):"
java $JVM -cp "$CP" dev.stepwarden.metrics.IntakeFlood "$F"

cat > "$W/flood.yaml" <<YAML
run: { name: flood, learning_rate: 0.001 }
read: { from: stdout, series: { train: loss } }
guards:
  - name: blow-up
    when: { rises: { series: train, above_level: 3.0, samples: 3 } }
    do: { scale: 0.5 }
YAML
# Side by side, three interleaved rounds, medians: the pipe's line rate and the whole supervisor.
: > "$W/side.txt"
# Besides wall time, the CPU time (user + system, children included) of each: it depends less on
# how busy the shared machine is than the ratio of wall times does.
for round in 1 2 3; do
  /usr/bin/time -o "$W/timec.txt" -f "%e %U %S" sh -c "cat '$F' | wc -l >/dev/null"
  read -r T_CAT U_CAT S_CAT < "$W/timec.txt"
  /usr/bin/time -o "$W/time.txt" -f "%e %M %U %S" java $RUNJVM -jar "$JAR" run --quiet \
    --rules "$W/flood.yaml" --run-dir "$W/runs" -- cat "$F" >/dev/null 2>"$W/run.err" || true
  read -r T_RUN RSS_KB U_RUN S_RUN < "$W/time.txt"
  rm -rf "$W/runs" # the logs of a flood are as big as the file: free the space
  echo "round $round: cat | wc -l ${T_CAT}s ($(rate "$T_CAT")), stepwarden run -- cat ${T_RUN}s" \
    "($(rate "$T_RUN")), peak RSS $((RSS_KB / 1024)) MB; CPU ${U_CAT}+${S_CAT}s against" \
    "${U_RUN}+${S_RUN}s"
  echo "$T_CAT $T_RUN $U_CAT $S_CAT $U_RUN $S_RUN" >> "$W/side.txt"
done
python3 - "$W/side.txt" "$T_PY" "$N" <<'PY'
import statistics, sys
rows = [list(map(float, l.split())) for l in open(sys.argv[1]) if l.strip()]
c, r = (statistics.median(row[k] for row in rows) for k in (0, 1))
cc = statistics.median(row[2] + row[3] for row in rows)
rc = statistics.median(row[4] + row[5] for row in rows)
p, n = float(sys.argv[2]), int(sys.argv[3])
print(f"medians: cat | wc -l {n/c:,.0f} lines/s, stepwarden run -- cat {n/r:,.0f} lines/s")
print(f"ratios: run/cat = {c/r:.1%} of the pipe rate; run vs python = {p/r:.1f}x")
print(f"CPU per million lines (user + system, medians): cat | wc -l {cc/n*1e6:.3f} s,"
      f" stepwarden run -- cat {rc/n*1e6:.3f} s ({rc/n*1e9:,.0f} ns a line)")
PY

cat > "$W/trainer.py" <<'PY'
import json, sys, time
n = int(sys.argv[1]); t = time.perf_counter(); w = sys.stdout.write
for i in range(n):
    w(json.dumps({"step": i, "loss": 1.0 / (i + 1), "lr": 0.001}) + "\n")
sys.stdout.flush()
print(f"trainer_seconds={time.perf_counter() - t:.3f}", file=sys.stderr)
PY
# Three interleaved rounds (the figure is noisy on a shared machine): the trainer to /dev/null,
# into a plain pipe read by cat (what any reader of the pipe costs it), and under stepwarden;
# once block-buffered (Python's default for a pipe) and once unbuffered (PYTHONUNBUFFERED=1, as
# many launch scripts set it: then every line is its own write system call).
: > "$W/rounds.txt"
# Buffered: LINES lines (about 12 s of trainer: the supervisor's one-off start-up and JIT work
# weigh as little as in a real run; with LINES/5 they add about 15 %). Unbuffered: LINES/5.
for mode in buffered unbuffered; do
  if [ "$mode" = buffered ]; then
    PYENV="env -u PYTHONUNBUFFERED"; M=$N
  else
    PYENV="env PYTHONUNBUFFERED=1"; M=$((N / 5))
  fi
  for round in 1 2 3; do
    A=$($PYENV python3 "$W/trainer.py" "$M" 2>&1 >/dev/null | sed 's/.*=//')
    P=$( { $PYENV python3 "$W/trainer.py" "$M" | cat >/dev/null; } 2>&1 | sed 's/.*=//')
    java $RUNJVM -jar "$JAR" run --quiet --rules "$W/flood.yaml" --run-dir "$W/runs2" -- $PYENV \
      python3 "$W/trainer.py" "$M" >/dev/null 2>"$W/run2.err" || true
    # --run-dir names the run directory itself; the trainer's stderr log is in it
    B=$(grep -o 'trainer_seconds=[0-9.]*' "$W/runs2/trainer.stderr.log" 2>/dev/null | sed 's/.*=//')
    rm -rf "$W/runs2"
    echo "$mode round $round, trainer flooding $M lines: /dev/null ${A}s, | cat ${P}s," \
      "stepwarden ${B:-?}s"
    echo "$mode $A $P ${B:-nan}" >> "$W/rounds.txt"
  done
done
python3 - "$W/rounds.txt" <<'PY'
import statistics, sys
rows = [l.split() for l in open(sys.argv[1]) if l.strip()]
for mode in ("buffered", "unbuffered"):
    a, p, b = (statistics.median(float(r[k]) for r in rows if r[0] == mode) for k in (1, 2, 3))
    print(f"trainer slowdown, {mode} (medians): {b/a-1:+.1%} against /dev/null, {b/p-1:+.1%} "
          f"against | cat (the pipe alone: {p/a-1:+.1%})")
PY

/usr/bin/time -o "$W/time3.txt" -f "%e %M" java $RUNJVM -jar "$JAR" run --quiet --rules "$W/flood.yaml" \
  --run-dir "$W/runs3" -- cat "$F" "$F" >/dev/null 2>"$W/run3.err" || true
OUT=$(tail -1 "$W/time3.txt")
echo "stepwarden run -- cat FILE FILE ($((2 * N)) samples): ${OUT% *}s  peak RSS $((${OUT#* } / 1024)) MB"
exit 0
