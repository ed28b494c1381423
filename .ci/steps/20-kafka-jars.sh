#!/usr/bin/env bash
# Fetches the Apache Kafka 3.9.1 broker jars from Maven Central into a stable cache dir, so that tests can start
# a real single-node broker without Docker (see src/devtools/kafka-broker.ts). Idempotent: exits at once when the
# cache is complete for the current pom. startBroker() does the same fetch lazily if this step did not run.
set -euo pipefail
cd "$(dirname "$0")/../.."
pom="tests/support/kafka/pom.xml"
libs="${MODEWATCH_KAFKA_LIBS:-$HOME/.cache/modewatch/kafka-3.9.1/libs}"
want="$(sha256sum "$pom" | cut -d' ' -f1)"
if [[ -f "$libs/.complete" && "$(cat "$libs/.complete")" == "$want" ]]; then
  echo "kafka jars: cached in $libs"
  exit 0
fi
if { ! command -v mvn >/dev/null || ! command -v java >/dev/null; } && command -v apt-get >/dev/null; then
  # Java 17 runs the broker; Maven resolves its jars. Both come from Debian's own packages.
  echo "kafka jars: installing Java 17 and Maven from Debian"
  if ! apt-get install -y -q openjdk-17-jre-headless maven >/dev/null; then
    apt-get update -q >/dev/null || true
    apt-get install -y -q openjdk-17-jre-headless maven >/dev/null || true
  fi
fi
if ! command -v mvn >/dev/null || ! command -v java >/dev/null; then
  # Not fatal here: a Docker engine or MODEWATCH_KAFKA_BROKERS may provide the broker instead;
  # the Kafka tests say why they cannot run (and fail under CI=true).
  echo "kafka jars: mvn or java not found; skipping the fetch" >&2
  exit 0
fi
mkdir -p "$(dirname "$libs")"
tmp="$(mktemp -d "$(dirname "$libs")/libs.tmp.XXXXXX")"
trap 'rm -rf "$tmp"' EXIT
mvn -q -B -Dstyle.color=never -f "$pom" dependency:copy-dependencies -DincludeScope=runtime -DoutputDirectory="$tmp"
echo "$want" > "$tmp/.complete"
rm -rf "$libs"
mv "$tmp" "$libs"
trap - EXIT
echo "kafka jars: $(ls "$libs" | wc -l) files in $libs"
