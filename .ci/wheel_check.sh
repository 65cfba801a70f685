#!/usr/bin/env bash
# The sdist and the wheel carry the sample reviews and resources, and the installed
# `lopside` command works from a fresh environment, outside the source tree.
#
#   bash .ci/wheel_check.sh            (PYTHON=python3.11 to choose the interpreter)
#
# Steps: build the sdist and, from it, the wheel (python -m build, in a throwaway
# environment); check both archives' contents; install the wheel with its declared
# dependencies into a fresh venv; from an empty temporary folder run `lopside check
# --json`, `lopside sheet` and `lopside --self-test` (offscreen) on a sample review found
# through lopside.paths. Needs the package registry (build requirements, dependencies).
set -euo pipefail
cd "$(dirname "$0")/.."
REPO=$(pwd)
PY=${PYTHON:-python3}
WORK=$(mktemp -d "${TMPDIR:-/tmp}/lopside-wheel-check.XXXXXX")
trap 'rm -rf "$WORK"' EXIT
# nothing from the checkout may leak in through the environment
unset PYTHONPATH PYTHONHOME PYTHONSTARTUP MPLCONFIGDIR
export PYTHONNOUSERSITE=1 QT_QPA_PLATFORM=offscreen

fail() { echo "wheel_check: FAILED: $*" >&2; exit 1; }

echo "== build sdist, then the wheel from the sdist"
"$PY" -m venv "$WORK/build-env"
"$WORK/build-env/bin/python" -m pip install -q --upgrade pip build
# Without --sdist/--wheel, build makes the sdist and then the wheel *from the sdist*: a
# file missing from the sdist is then missing from the wheel too, and shows below.
"$WORK/build-env/bin/python" -m build --outdir "$WORK/dist" "$REPO" >"$WORK/build.log" 2>&1 \
  || { tail -40 "$WORK/build.log"; fail "python -m build"; }
SDIST=$(ls "$WORK"/dist/lopside-*.tar.gz)
WHEEL=$(ls "$WORK"/dist/lopside-*.whl)
echo "built $(basename "$SDIST") and $(basename "$WHEEL")"

echo "== archive contents"
"$WORK/build-env/bin/python" - "$REPO" "$SDIST" "$WHEEL" <<'EOF' || fail "archive contents"
import configparser, sys, tarfile, zipfile
from pathlib import Path

repo, sdist, wheel = Path(sys.argv[1]), sys.argv[2], sys.argv[3]
with tarfile.open(sdist) as t:
    s_names = {n.split("/", 1)[1] for n in t.getnames() if "/" in n}
with zipfile.ZipFile(wheel) as z:
    w_names = set(z.namelist())
    ep_file = next(n for n in w_names if n.endswith(".dist-info/entry_points.txt"))
    ep = configparser.ConfigParser()
    ep.read_string(z.read(ep_file).decode())
problems = []
for top in ("sample_reviews", "resources"):
    files = [p for p in (repo / top).rglob("*") if p.is_file() and "__pycache__" not in p.parts]
    if not files:
        problems.append(f"{top}/ is empty in the checkout")
    for p in files:
        rel = p.relative_to(repo).as_posix()
        if rel not in s_names:
            problems.append(f"sdist lacks {rel}")
        if f"lopside/{rel}" not in w_names:
            problems.append(f"wheel lacks lopside/{rel}")
if not any(n.endswith(".lopside") and n.startswith("lopside/sample_reviews/") for n in w_names):
    problems.append("wheel has no lopside/sample_reviews/*.lopside")
if ep.get("console_scripts", "lopside", fallback="").strip() != "lopside.cli:main":
    problems.append("wheel lacks the console script lopside = lopside.cli:main")
for p in problems:
    print("  " + p)
print(f"sdist {len(s_names)} entries, wheel {len(w_names)} entries, {len(problems)} problems")
sys.exit(1 if problems else 0)
EOF

echo "== install the wheel into a fresh environment"
"$PY" -m venv "$WORK/venv"
"$WORK/venv/bin/python" -m pip install -q --upgrade pip
"$WORK/venv/bin/python" -m pip install -q "$WHEEL" || fail "pip install of the wheel"
"$WORK/venv/bin/python" -m pip check || fail "pip check"

echo "== run the installed command outside the source tree"
RUN="$WORK/run"
mkdir -p "$RUN/home"
cd "$RUN"
export HOME="$RUN/home" XDG_CONFIG_HOME="$RUN/home/.config" XDG_CACHE_HOME="$RUN/home/.cache"
export LOPSIDE_SETTINGS_DIR="$RUN/settings"
SAMPLE=$("$WORK/venv/bin/python" -c \
  "from lopside.paths import sample_reviews; print([p for p in sample_reviews() if p.suffix == '.lopside'][0])") \
  || fail "finding a sample review through lopside.paths"
SITE=$("$WORK/venv/bin/python" -c "import sysconfig; print(sysconfig.get_paths()['purelib'])")
case "$SAMPLE" in
  "$SITE"/lopside/sample_reviews/*) echo "sample: $SAMPLE" ;;
  *) fail "lopside.paths found $SAMPLE, not the installed copy under $SITE" ;;
esac
case "$("$WORK/venv/bin/python" -c 'import lopside; print(lopside.__file__)')" in
  "$SITE"/*) ;;
  *) fail "lopside imported from outside the fresh environment" ;;
esac

LOPSIDE="$WORK/venv/bin/lopside"
"$LOPSIDE" --version
"$LOPSIDE" check "$SAMPLE" --json >check.json || fail "lopside check --json"
"$WORK/venv/bin/python" - <<'EOF' || fail "check --json output"
import json
d = json.load(open("check.json", encoding="utf-8"))
need = ["measure", "k", "studies", "pooled", "heterogeneity", "tests", "trim_fill"]
missing = [k for k in need if k not in d]
assert not missing and d["k"] >= 1, f"missing {missing} or k={d.get('k')}"
print(f"check --json: k={d['k']}, measure={d['measure']}, {len(d)} top-level keys")
EOF
"$LOPSIDE" sheet "$SAMPLE" -o sheet.pdf || fail "lopside sheet"
head -c 5 sheet.pdf | grep -q '%PDF-' || fail "sheet.pdf is not a PDF"
echo "sheet.pdf: $(wc -c <sheet.pdf) bytes"
"$LOPSIDE" --self-test >selftest.log 2>&1 || { cat selftest.log; fail "lopside --self-test"; }
tail -1 selftest.log
echo "wheel_check: all passed"
