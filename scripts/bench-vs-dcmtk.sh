#!/usr/bin/env bash
# Measures C-STORE throughput over loopback: our requestor into our
# acceptor, DCMTK's storescu into storescp --ignore, and our throughput as
# a ratio to DCMTK's on the same files (benchmarks in scp/bench_test.go).
#
#   scripts/bench-vs-dcmtk.sh            # every benchmark, 3 runs each
#   BENCH=OursVsDCMTK scripts/bench-vs-dcmtk.sh
#   BENCHTIME=10x scripts/bench-vs-dcmtk.sh -cpuprofile /tmp/cpu.out
#
# Extra arguments go to go test. Needs the Debian package dcmtk.
set -euo pipefail
cd "$(dirname "$0")/.."

if ! command -v storescu >/dev/null 2>&1 || ! command -v storescp >/dev/null 2>&1; then
  echo "storescu/storescp not found: install the Debian package dcmtk" >&2
  exit 1
fi

echo "# $(go version); $(storescu --version 2>&1 | head -n 1)"
echo "# $(nproc) CPUs: $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2- | sed 's/^ *//')"
exec go test -run '^$' -bench "${BENCH:-.}" -benchtime "${BENCHTIME:-3x}" "$@" ./scp/
