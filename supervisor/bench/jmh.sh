#!/bin/sh
# JMH benchmarks of the metrics readers. Usage: supervisor/bench/jmh.sh [JMH options]
# e.g. supervisor/bench/jmh.sh ParserBench -f 1 -wi 3 -i 5
set -eu
cd "$(dirname "$0")/.."
mvn -B -q -Pbench -DskipTests test-compile dependency:build-classpath \
  -Dmdep.outputFile=target/bench.classpath -Dmdep.includeScope=test
exec java -cp "target/test-classes:target/classes:$(cat target/bench.classpath)" \
  org.openjdk.jmh.Main "$@"
