#!/usr/bin/env bash
# Audits every series folder of a converter-QA tree of real scanner DICOM
# and compares what `dwiaudit check` read with the tree's own reference
# gradient tables.
#
#   scripts/real-data.sh DIR [FOLDER...]
#
# DIR holds In/<folder>/... (DICOM files, optionally gzipped, one or more
# series per folder) and Ref/<name>.bval and .bvec (FSL format: one line
# of b-values, three lines of direction components, a column per volume).
# FOLDERs, relative to DIR/In, limit the run to those folders; by default
# every folder under In that holds files is run.
#
# For each folder the script builds dwiaudit once, runs `dwiaudit check
# --format json` on a copy of the folder (gzipped files inflated), matches
# each diffusion series it reports to a reference by series number and
# description, and compares:
#
#   - the distinct nominal b-values: values within max(5, 2% of b) s/mm²
#     of each other are one, and b <= 50 is 0 (the audit's own default
#     tolerances and b0 limit, audit/dwi DefaultTolerances);
#   - the number of distinct diffusion directions at b > 50, directions
#     within 1 degree of each other (or of each other's opposite) being
#     one: from the series' "volumes" gradient table when check prints
#     one, otherwise not compared ("n/a");
#   - the findings missing-b0, audit-failed and incomplete-series, which
#     a complete acquisition must not get.
#
# It prints one table row per series and per reference no series matched,
# and exits 1 when any row mismatches (2 on bad arguments). Nothing is
# written into DIR. Needs python3.
set -euo pipefail
repo="$(cd "$(dirname "$0")/.." && pwd)"

if [ $# -lt 1 ] || [ ! -d "$1/In" ] || [ ! -d "$1/Ref" ]; then
  echo "usage: scripts/real-data.sh DIR [FOLDER...]   (DIR holds In/ and Ref/)" >&2
  exit 2
fi
if ! command -v python3 >/dev/null 2>&1; then
  echo "python3 not found: install the Debian package python3" >&2
  exit 2
fi
dir="$(cd "$1" && pwd)"
shift

work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
(cd "$repo" && go build -o "$work/dwiaudit" ./cmd/dwiaudit)

folders=()
if [ $# -gt 0 ]; then
  for f in "$@"; do folders+=("${f%/}"); done
else
  while IFS= read -r f; do
    if [ "$f" = "$dir/In" ]; then folders+=("."); else folders+=("${f#"$dir/In/"}"); fi
  done < <(find "$dir/In" -type f -printf '%h\n' | sort -u)
fi

mkdir -p "$work/out"
i=0
for f in "${folders[@]}"; do
  i=$((i + 1))
  src="$dir/In/$f"
  if [ ! -d "$src" ]; then
    echo "real-data: no folder $src" >&2
    exit 2
  fi
  copy="$work/in/$i"
  mkdir -p "$copy"
  # Only this folder's own files (not its subfolders: they are folders
  # of their own), gzipped ones inflated.
  find "$src" -maxdepth 1 -type f -print0 | while IFS= read -r -d '' file; do
    base="$(basename "$file")"
    case "$base" in
      *.gz) gzip -dc "$file" > "$copy/${base%.gz}" ;;
      *) cp "$file" "$copy/$base" ;;
    esac
  done
  printf '%s\n' "$f" > "$work/out/$i.folder"
  # check exits 1 when it has findings; its JSON is what counts. An
  # audit that could not run prints no JSON, and the comparison says so.
  "$work/dwiaudit" check --format json "$copy" > "$work/out/$i.json" 2> "$work/out/$i.err" || true
done

exec python3 - "$dir/Ref" "$work/out" <<'PY'
import json, math, os, re, sys

ref_dir, out_dir = sys.argv[1], sys.argv[2]
MAX_B0 = 50.0          # b <= 50 s/mm^2 is b0 (common practice)
B_ABS, B_REL = 5.0, 0.02  # audit/dwi DefaultTolerances: max(5, 2% of b)
DIR_DEG = 1.0          # audit/dwi DefaultTolerances: 1 degree
BAD = {"missing-b0", "audit-failed", "incomplete-series"}

def nominal(values):
    """Distinct nominal b-values: clusters of sorted values whose
    neighbours are within the tolerance, b0 for b <= MAX_B0."""
    out = []
    for b in sorted(0.0 if v <= MAX_B0 else v for v in values):
        if out and b - out[-1][-1] <= max(B_ABS, B_REL * out[-1][-1]):
            out[-1].append(b)
        else:
            out.append([b])
    return [round(sum(c) / len(c)) for c in out]

def distinct_dirs(vectors):
    kept = []
    cos = math.cos(math.radians(DIR_DEG))
    for v in vectors:
        n = math.sqrt(sum(x * x for x in v))
        if n < 0.5:
            continue
        u = [x / n for x in v]
        if not any(abs(sum(a * b for a, b in zip(u, k))) >= cos for k in kept):
            kept.append(u)
    return len(kept)

def tokens(s):
    return [t for t in re.split(r"[^0-9a-z]+", s.lower()) if t]

refs = {}
for name in sorted(os.listdir(ref_dir)):
    if not name.endswith(".bval"):
        continue
    stem = name[:-5]
    bvals = [float(x) for x in open(os.path.join(ref_dir, name)).read().split()]
    vecs = []
    bvec = os.path.join(ref_dir, stem + ".bvec")
    if os.path.exists(bvec):
        rows = [[float(x) for x in line.split()] for line in open(bvec) if line.strip()]
        if len(rows) == 3 and all(len(r) == len(bvals) for r in rows):
            vecs = [(rows[0][k], rows[1][k], rows[2][k]) for k in range(len(bvals))]
    dirs = distinct_dirs([v for v, b in zip(vecs, bvals) if b > MAX_B0]) if vecs else None
    refs[stem] = {"b": nominal(bvals), "dirs": dirs, "used": False}

def match(series, folder):
    """The reference of a series: its series number is one of the
    reference name's tokens and at least 60% of the name's other tokens
    are tokens of the series description or of the folder's path (the
    names are <number>_<description>[_suffix] or
    [maker_]<description>_<number>); the best such share wins."""
    want = str(series.get("series_number", ""))
    known = set(tokens(series.get("series_description", ""))) | set(tokens(folder))
    best, score = None, 0.6
    for stem in refs:
        t = tokens(stem)
        if want not in t:
            continue
        rest = [x for x in t if x != want]
        share = sum(x in known for x in rest) / len(rest) if rest else 0
        if share >= score:
            best, score = stem, share
    return best

def directions(series):
    vols = series.get("volumes")
    if vols is None:
        return None
    return distinct_dirs([v["direction"] for v in vols
                          if v.get("kind") == "direction" and v.get("direction") and v.get("bvalue", 0) > MAX_B0])

rows, bad = [], 0
for name in sorted(os.listdir(out_dir), key=lambda n: int(n.split(".")[0]) if n[0].isdigit() else 0):
    if not name.endswith(".folder"):
        continue
    k = name[:-7]
    folder = open(os.path.join(out_dir, name)).read().strip()
    try:
        rep = json.load(open(os.path.join(out_dir, k + ".json")))
    except (OSError, ValueError):
        err = open(os.path.join(out_dir, k + ".err")).read().strip().splitlines()
        rows.append([folder, "-", "-", "-", "-", "-", "-", "check failed: " + (err[-1] if err else "no output"), "FAIL"])
        bad += 1
        continue
    findings = {}
    for f in rep.get("findings") or []:
        findings.setdefault(f.get("series_uid"), set()).add(f.get("rule"))
    for s in rep.get("series") or []:
        stem = match(s, folder)
        got_b = nominal(s.get("bvalues") or [])
        got_d = directions(s)
        worst = sorted(findings.get(s.get("series_uid"), set()) & BAD)
        label = "%s %s" % (s.get("series_number"), s.get("series_description"))
        if stem is None:
            rows.append([folder, label, "(none)", "-", got_b, "-", "n/a" if got_d is None else got_d, ",".join(worst) or "-", "no reference"])
            continue
        ref = refs[stem]
        ref["used"] = True
        ok = got_b == ref["b"] and not worst
        if got_d is not None and ref["dirs"] is not None:
            ok = ok and got_d == ref["dirs"]
        rows.append([folder, label, stem, ref["b"], got_b, ref["dirs"], "n/a" if got_d is None else got_d,
                     ",".join(worst) or "-", "ok" if ok else "MISMATCH"])
        bad += 0 if ok else 1
for stem, ref in refs.items():
    if not ref["used"]:
        rows.append(["-", "(no series)", stem, ref["b"], "-", ref["dirs"], "-", "-", "NOT FOUND"])
        bad += 1

head = ["folder", "series", "reference", "ref b", "b", "ref dirs", "dirs", "findings", "result"]
cells = [head] + [[str(c) for c in r] for r in rows]
w = [max(len(r[i]) for r in cells) for i in range(len(head))]
for r in cells:
    print("  ".join(c.ljust(w[i]) for i, c in enumerate(r)).rstrip())
print("%d row(s), %d mismatch(es)" % (len(rows), bad))
sys.exit(1 if bad else 0)
PY
