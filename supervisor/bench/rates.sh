#!/bin/sh
# The supervisor at the rates trainers really print (10 to 5,000 lines/s), side by side in one run:
# CPU added per line against `tee FILE` on the same paced trainer, an idle night's CPU per hour,
# the reaction from a NaN line to the control file's replacement and to the SIGTERM of a stop,
# and resident memory. Method and resolution: the docstring of rates.py.
# Usage: supervisor/bench/rates.sh            (about 6 minutes; needs python3 and Linux /proc)
# Tunables (environment): RATES=10,100,500,5000 WARM=30 WINDOW=30 IDLE=60 LAT_SECONDS=30 LAT_WARM=10
#   BAD_EVERY=0.5 STOP_RUNS=10 STOP_AFTER=4 POLL_US=200 (IDLE=0 or LAT_SECONDS=0 skip those
#   parts); SKIP_BUILD=1 reuses target/stepwarden.jar; STEPWARDEN_JAR=PATH measures another build
#   (its class-data archive is the .jsa beside it).
set -eu
HERE=$(cd "$(dirname "$0")" && pwd)
MOD=$(dirname "$HERE")
W=$(mktemp -d "${TMPDIR:-/tmp}/stepwarden-rates.XXXXXX")
trap '[ -n "${KEEP:-}" ] || rm -rf "$W"' EXIT
cd "$MOD"
JAR=${STEPWARDEN_JAR:-$MOD/target/stepwarden.jar}
[ "${SKIP_BUILD:-}" = 1 ] || [ -n "${STEPWARDEN_JAR:-}" ] || mvn -B -q -DskipTests package >/dev/null
# The supervisor's JVM as the README alias launches it (as flood.sh does).
JVM=${STEPWARDEN_JVM_OPTS:--XX:+UseSerialGC -Xms32m -Xmx256m}
RUNJVM="$JVM -XX:SharedArchiveFile=${JAR%.jar}.jsa -Xlog:cds=off -Xlog:cds+dynamic=off"
python3 "$HERE/rates.py" "$JAR" "$RUNJVM" "$W"
