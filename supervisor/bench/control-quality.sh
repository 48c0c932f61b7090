#!/bin/sh
# Control-quality benchmark: starting rates 1e-3..3 (half-decade steps), each unsupervised,
# supervised and supervised with the rate probe, on the demo data and two open datasets shipped by
# Debian's python3-sklearn (wine, breast cancer). Prints a Markdown table per task.
# Usage: supervisor/bench/control-quality.sh [--guards FILE] [--tasks demo,wine,cancer]
#        [--out DIR] [--parallel N]      (defaults: bench/control-quality.yaml, all tasks, 2)
# Needs: JDK 17, Maven, python3-sklearn's CSV files (apt-get install -y python3-sklearn).
set -eu
HERE=$(cd "$(dirname "$0")" && pwd)
MOD=$(dirname "$HERE")
cd "$MOD"
mvn -B -q -DskipTests package >/dev/null
exec java -XX:+UseSerialGC -cp "target/test-classes:target/stepwarden.jar" \
  dev.stepwarden.bench.ControlQuality "$@"
