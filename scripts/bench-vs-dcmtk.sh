#!/usr/bin/env bash
# Durable ingest of the node against DCMTK, in one run.
#
#   scripts/bench-vs-dcmtk.sh                 # receivers: the node against storescp -od
#   ROUNDS=5 IMAGES=300 scripts/bench-vs-dcmtk.sh
#   scripts/bench-vs-dcmtk.sh scp [go test flags]   # the scp benchmarks (requestor/acceptor)
#
# receivers (the default): the same synthetic images (256 x 256 MR, about
# 130 KB each, from `dwiaudit phantom`) are sent by DCMTK storescu
# (TCP_NODELAY=1, -pdu 131072) over 1, 4 and 8 parallel associations, each
# a share of the files, to two receivers on fresh folders: `dwiaudit serve`
# (answers each C-STORE only once the instance is durable) and DCMTK
# `storescp -od` (writes files, never syncs). The receivers alternate
# within every round (the first one swaps from round to round, so neither
# always meets a warm or a cold page cache), for ROUNDS rounds. Printed:
# every run, then per association count the medians of images/s, the
# node's ratio to storescp, CPU per image (utime + stime of the receiver
# from /proc/<pid>/stat, proc(5), over the sending only) and peak RSS
# (VmHWM from /proc/<pid>/status). Every run checks that all images arrived.
# storescp runs as DCMTK ships it (no --fork): it serves one association at
# a time, so its parallel senders queue.
#
# scp: the Go benchmarks of scp/bench_test.go (our requestor into our
# acceptor, DCMTK's storescu into storescp --ignore, and the ratio);
# BENCH and BENCHTIME select them as before.
#
# Needs the Debian package dcmtk, Go, python3 (for the medians) and Linux /proc.
set -euo pipefail
cd "$(dirname "$0")/.."

if ! command -v storescu >/dev/null 2>&1 || ! command -v storescp >/dev/null 2>&1; then
  echo "storescu/storescp not found: install the Debian package dcmtk" >&2
  exit 1
fi

echo "# $(go version); $(storescu --version 2>&1 | head -n 1)"
echo "# $(nproc) CPUs: $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2- | sed 's/^ *//'); load $(cut -d' ' -f1-3 /proc/loadavg)"

if [[ "${1:-receivers}" == scp ]]; then
  shift
  exec go test -run '^$' -bench "${BENCH:-.}" -benchtime "${BENCHTIME:-3x}" "$@" ./scp/
fi
if [[ "${1:-receivers}" != receivers ]]; then
  echo "usage: $0 [receivers | scp [go test flags]]" >&2
  exit 2
fi

ROUNDS=${ROUNDS:-3}
IMAGES=${IMAGES:-300}   # a multiple of 5: the phantom writes 5 images per slice
PARALLEL=${PARALLEL:-"1 4 8"}
PDU=131072              # the largest Maximum Length storescp accepts (storescp --help)
TICK=$(getconf CLK_TCK)

work=$(mktemp -d "${TMPDIR:-/tmp}/bench-vs-dcmtk.XXXXXX")
receiver_pid=
cleanup() {
  if [[ -n "$receiver_pid" ]]; then kill "$receiver_pid" 2>/dev/null || true; wait "$receiver_pid" 2>/dev/null || true; fi
  rm -rf "$work"
}
trap cleanup EXIT

go build -o "$work/dwiaudit" ./cmd/dwiaudit
"$work/dwiaudit" phantom --out "$work/images" --matrix 256 --slices $((IMAGES / 5)) >/dev/null
mapfile -t files < <(find "$work/images" -name '*.dcm' | sort)
if (( ${#files[@]} != IMAGES )); then
  echo "phantom wrote ${#files[@]} images, want $IMAGES" >&2
  exit 1
fi
bytes=$(cat "${files[@]}" | wc -c)
echo "# $IMAGES images, $((bytes / IMAGES)) bytes each on average; rounds $ROUNDS; associations $PARALLEL"

free_port() { python3 -c 'import socket; s=socket.socket(); s.bind(("127.0.0.1",0)); print(s.getsockname()[1])'; }

wait_port() { # wait until 127.0.0.1:$1 accepts, at most 20 s
  for _ in $(seq 200); do
    if (exec 3<>"/dev/tcp/127.0.0.1/$1") 2>/dev/null; then return 0; fi
    sleep 0.1
  done
  echo "nothing listens on port $1" >&2
  return 1
}

cpu_ticks() { # utime + stime of a process (fields 14 and 15 of /proc/<pid>/stat)
  local rest
  rest=$(sed 's/^.*) //' "/proc/$1/stat")  # the command name may hold spaces
  awk '{print $12 + $13}' <<<"$rest"      # fields 14, 15 counted from after "(comm)"
}

vm_hwm_kb() { awk '/^VmHWM:/ {print $2}' "/proc/$1/status"; }

start_receiver() { # $1 = node | storescp, $2 = folder; sets receiver_pid, port
  port=$(free_port)
  case $1 in
    node)
      TCP_NODELAY=1 "$work/dwiaudit" serve --data "$2" --listen "127.0.0.1:$port" --http 127.0.0.1:0 \
        --log-level warn >"$work/node.out" 2>"$work/node.err" &
      receiver_pid=$! called=DWIAUDIT ;;
    storescp)
      TCP_NODELAY=1 storescp -aet STORESCP -od "$2" -pdu $PDU "$port" >"$work/storescp.out" 2>&1 &
      receiver_pid=$! called=STORESCP ;;
  esac
  if ! wait_port "$port"; then
    echo "$1 did not start:" >&2
    cat "$work/$1".* >&2 2>/dev/null || true
    return 1
  fi
}

stop_receiver() {
  kill -TERM "$receiver_pid"
  wait "$receiver_pid" 2>/dev/null || true
  receiver_pid=
}

send() { # $1 = associations: that many storescu processes, each its share
  local n=$1 pids=() i
  for ((i = 0; i < n; i++)); do
    TCP_NODELAY=1 storescu -aet BENCH -aec "$called" -pdu $PDU 127.0.0.1 "$port" \
      "${files[@]:$((i * IMAGES / n)):$(((i + 1) * IMAGES / n - i * IMAGES / n))}" >"$work/storescu.$i" 2>&1 &
    pids+=($!)
  done
  local failed=0
  for i in "${pids[@]}"; do wait "$i" || failed=1; done
  if ((failed)); then
    echo "storescu failed:" >&2
    cat "$work"/storescu.* >&2
    return 1
  fi
}

count_stored() { # instances a receiver stored in folder $2
  case $1 in
    node) find "$2/instances" -type f -name '*.dcm' | wc -l ;;
    storescp) find "$2" -type f | wc -l ;;
  esac
}

results="$work/results"
run_one() { # $1 = receiver, $2 = associations, $3 = round
  local dir="$work/data-$1-$2-$3"
  mkdir -p "$dir"
  start_receiver "$1" "$dir"
  local c0 c1 t0 t1 hwm got
  c0=$(cpu_ticks "$receiver_pid")
  t0=$(date +%s%N)
  send "$2"
  t1=$(date +%s%N)
  c1=$(cpu_ticks "$receiver_pid")
  hwm=$(vm_hwm_kb "$receiver_pid")
  stop_receiver
  got=$(count_stored "$1" "$dir")
  if ((got != IMAGES)); then
    echo "$1 stored $got of $IMAGES images" >&2
    exit 1
  fi
  rm -rf "$dir"
  local line
  line=$(awk -v r="$1" -v p="$2" -v k="$3" -v t0="$t0" -v t1="$t1" -v c="$((c1 - c0))" -v tick="$TICK" -v n="$IMAGES" -v hwm="$hwm" \
    'BEGIN { s = (t1 - t0) / 1e9; printf "%s %d %d %.1f %.3f %.1f\n", r, p, k, n / s, c / tick * 1000 / n, hwm / 1024 }')
  echo "$line" >>"$results"
  read -r r p k rate cpu rss <<<"$line"
  printf '%-8s assoc=%d round=%d  %7.1f images/s  %.3f ms CPU/image  peak RSS %6.1f MiB\n' "$r" "$p" "$k" "$rate" "$cpu" "$rss"
}

for ((round = 1; round <= ROUNDS; round++)); do
  for p in $PARALLEL; do
    if ((round % 2)); then order="node storescp"; else order="storescp node"; fi
    for r in $order; do run_one "$r" "$p" "$round"; done
  done
done

python3 - "$results" <<'EOF'
import statistics, sys
rows = [l.split() for l in open(sys.argv[1])]
runs = {}
for r, p, k, rate, cpu, rss in rows:
    runs.setdefault((int(p), r), []).append((float(rate), float(cpu), float(rss), int(k)))
print()
print("assoc  node img/s  storescp img/s  ratio(median of rounds)  node ms CPU/img  storescp ms CPU/img  CPU ratio  node RSS MiB  storescp RSS MiB")
for p in sorted({p for p, _ in runs}):
    node, scp = runs[(p, "node")], runs[(p, "storescp")]
    med = lambda xs, i: statistics.median(x[i] for x in xs)
    by_round = {x[3]: x[0] for x in scp}
    ratios = [x[0] / by_round[x[3]] for x in node]
    print(f"{p:5d}  {med(node,0):10.1f}  {med(scp,0):14.1f}  {statistics.median(ratios):6.2f} ({' '.join(f'{r:.2f}' for r in ratios)})"
          f"  {med(node,1):15.3f}  {med(scp,1):19.3f}  {med(node,1)/med(scp,1):9.2f}  {max(x[2] for x in node):12.1f}  {max(x[2] for x in scp):16.1f}")
EOF
