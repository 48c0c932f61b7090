#!/bin/sh
# Control-quality benchmark: does a supervised night end well from any starting rate? Three small
# PyTorch tasks of our own (bench/control_quality_trainer.py: digits MLP, breast-cancer MLP steered
# by restart, digits CNN), 3 seeds, starting rates 1e-3..3 in half-decade steps; each night at the
# fixed rate (the grid), with PyTorch's ReduceLROnPlateau in the trainer, and supervised by the
# guard file. Scored on a held-out test split; prints Markdown tables (README "Does the night end
# well?").
# Usage: supervisor/bench/control-quality.sh [--guards FILE] [--tasks digits-mlp,cancer-mlp,digits-cnn]
#        [--seeds N] [--out DIR] [--parallel N]   (defaults: rules/overnight.yaml, all, 3, temp, 2)
# Needs: JDK 17, Maven, Debian's python3-torch and python3-sklearn for /usr/bin/python3.
set -eu
HERE=$(cd "$(dirname "$0")" && pwd)
MOD=$(dirname "$HERE")
cd "$MOD"
/usr/bin/python3 -c "import torch, sklearn" 2>/dev/null || {
  echo "control-quality: /usr/bin/python3 cannot import torch and sklearn;" \
    "apt-get install -y python3-torch python3-sklearn" >&2; exit 2; }
mvn -B -q -o -DskipTests package >/dev/null 2>&1 || mvn -B -q -DskipTests package >/dev/null
exec java -XX:+UseSerialGC -cp "target/test-classes:target/stepwarden.jar" \
  dev.stepwarden.bench.ControlQuality "$@"
