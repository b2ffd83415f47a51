#!/usr/bin/env bash
# The engine under AddressSanitizer and UndefinedBehaviorSanitizer: the C++ unit programs and the
# Python test suite (without the tests marked slow) against a sanitized build of loschmidt._core.
# Any report aborts the run (-fno-sanitize-recover=all, halt_on_error), so exit 0 means clean.
#
#   bash tools/sanitize.sh            # about 10-20 minutes on 2 cores
#   SANITIZE_DIR=/tmp/x PYTEST_ARGS="tests/test_batch.py" bash tools/sanitize.sh
#
# Python itself is not instrumented, so the sanitizer runtimes are preloaded; leak detection is
# off for the Python run (the interpreter keeps its allocations to the end) but on for the C++
# programs. Not part of CI (it would not fit the time limit); run it before a release and after
# touching memory handling in cpp/.
set -euo pipefail
cd "$(dirname "$0")/.."
top=$(pwd)
work=${SANITIZE_DIR:-/tmp/loschmidt-sanitize}
sanitizers=${SANITIZERS:-address,undefined}
mkdir -p "$work"

fma=""
if grep -qw fma /proc/cpuinfo 2>/dev/null; then fma="-mfma"; fi

echo "== C++ unit programs with -fsanitize=$sanitizers"
for src in cpp/tests/test_*.cpp; do
  exe="$work/$(basename "$src" .cpp)"
  g++ -std=c++17 -O1 -g -Wall -Wextra -ffp-contract=off $fma -fsanitize="$sanitizers" \
      -fno-sanitize-recover=all -fno-omit-frame-pointer -Icpp/include "$src" -o "$exe" -pthread
  ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1 "$exe" > "$exe.log" 2>&1 \
    || { echo "FAILED: $src (log: $exe.log)"; tail -30 "$exe.log"; exit 1; }
  echo "   $(basename "$src"): clean ($(tail -1 "$exe.log"))"
done

echo "== sanitized build of loschmidt._core (build dir $work/build)"
if [ ! -x "$work/venv/bin/python" ]; then
  python3 -m venv "$work/venv"
  "$work/venv/bin/pip" install -q --disable-pip-version-check scikit-build-core pybind11 ninja cmake 2>&1 \
    | { grep -v "^WARNING: Location" || true; }
fi
"$work/venv/bin/pip" install -q --disable-pip-version-check --no-build-isolation \
  -Cbuild-dir="$work/build" -Ccmake.define.LOSCHMIDT_SANITIZE="$sanitizers" -Ccmake.build-type=RelWithDebInfo \
  "$top[test]" 2>&1 | { grep -v "^WARNING: Location" || true; }

echo "== Python tests under the sanitizers"
preload=""
for lib in libasan.so libubsan.so; do
  path=$(gcc -print-file-name="$lib")
  [ -f "$path" ] && preload="$preload $path"
done
cd "$work"   # import the installed (sanitized) package, not the source tree
LD_PRELOAD="$preload" ASAN_OPTIONS=detect_leaks=0:abort_on_error=1:halt_on_error=1 \
  UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1 MPLBACKEND=Agg \
  "$work/venv/bin/python" -m pytest -q -p no:cacheprovider -m "not slow" ${PYTEST_ARGS:-"$top/tests"} \
  -c "$top/pyproject.toml" --rootdir "$top"
echo "== sanitizers: clean"
