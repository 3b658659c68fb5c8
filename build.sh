#!/usr/bin/env bash
# Builds the Rolloff page so that www/index.html works opened straight from disk (file://).
#
#   ./build.sh          build the wasm core and package it into www/rolloff-wasm.js, then exit
#   ./build.sh serve    build, then serve www/ on http://127.0.0.1:${PORT:-8000}/ (Ctrl-C stops)
#   ./build.sh test     run every test: cargo fmt --check, native cargo tests, benchmark build,
#                       then build the page and run the wasm tests in headless Chromium
#                       (wasm-bindgen-test) and the browser acceptance tests (node --test)
#   ./build.sh bench    build, then run the browser benchmark (tests/browser/bench.js)
#
# Why one classic script: Chromium blocks ES modules, fetch() of a sibling .wasm file and
# `new Worker('file.js')` for pages opened from file://. A classic <script src> is allowed, so the
# wasm-bindgen glue (--target no-modules) and the wasm bytes (base64) go into one such script.
#
# Every install step runs only when its tool is missing. Environment knobs:
#   ROLLOFF_WASM_OPT=0   skip wasm-opt (from the npm package `binaryen`; Debian's binaryen 108
#                        corrupts wasm-bindgen 0.2.130 output, so it is never used)
#   ROLLOFF_WASM_OPT_LEVEL=-O3   wasm-opt's level (-Oz made the core only 1 % smaller than -O3)
#   ROLLOFF_PAGE_RUSTFLAGS=...   extra rustc flags for the page's wasm build (size experiments)
#   PORT=8000            port for `serve`
# Knobs of the long test runs (`test` runs the bounded defaults):
#   ROLLOFF_FUZZ_LINKS=1000000         links of tests/cli_fuzz.rs's every-command fuzzer (1,200)
#   ROLLOFF_ENGINE_FUZZ_LINKS=50000    links through the page's evaluate (engine_fuzz, 2,000)
#   ROLLOFF_MEMORY_RUNS=100000         the largest study of tests/browser/memory.test.js (20,000)
set -euo pipefail
cd "$(dirname "$0")"

WASM_TARGET=wasm32-unknown-unknown
PKG_DIR=target/wasm-pkg
OUT_JS=www/rolloff-wasm.js
BINARYEN_VERSION=132.0.0
BINARYEN_DIR=target/binaryen

log() { printf '[build.sh] %s\n' "$*" >&2; }

# The wasm-bindgen CLI must match the crate version in Cargo.lock exactly.
bindgen_version() {
    awk '/^name = "wasm-bindgen"$/ { getline; gsub(/version = |"/, ""); print; exit }' Cargo.lock
}

need_wasm_target() {
    if ! rustup target list --installed | grep -qx "$WASM_TARGET"; then
        log "adding the Rust target $WASM_TARGET"
        rustup target add "$WASM_TARGET"
    fi
}

need_bindgen() {
    local want have
    want=$(bindgen_version)
    if [ -z "$want" ]; then
        log "Cargo.lock names no wasm-bindgen version; run 'cargo generate-lockfile' first"
        exit 1
    fi
    have=$(wasm-bindgen --version 2>/dev/null | awk '{ print $2 }' || true)
    if [ "$have" != "$want" ] || ! command -v wasm-bindgen-test-runner >/dev/null 2>&1; then
        log "installing wasm-bindgen-cli $want (found '${have:-none}'); takes about 2 minutes"
        # --locked fails on this registry mirror (a locked dependency version is missing).
        cargo install wasm-bindgen-cli --version "$want"
    fi
}

need_wasm_opt() {
    if [ "${ROLLOFF_WASM_OPT:-1}" = "0" ]; then
        return 1
    fi
    if [ ! -x "$BINARYEN_DIR/node_modules/.bin/wasm-opt" ]; then
        if ! command -v npm >/dev/null 2>&1; then
            log "npm not found: skipping wasm-opt (the page works without it, only larger)"
            return 1
        fi
        log "installing binaryen $BINARYEN_VERSION from npm into $BINARYEN_DIR"
        mkdir -p "$BINARYEN_DIR"
        npm install --prefix "$BINARYEN_DIR" --no-save --no-audit --no-fund \
            "binaryen@$BINARYEN_VERSION" >&2
    fi
    return 0
}

apt_install_missing() {
    # Arguments: pairs of "command package".
    local missing=()
    while [ $# -gt 1 ]; do
        command -v "$1" >/dev/null 2>&1 || missing+=("$2")
        shift 2
    done
    if [ ${#missing[@]} -gt 0 ]; then
        log "installing Debian packages: ${missing[*]}"
        apt-get update
        DEBIAN_FRONTEND=noninteractive apt-get install -y "${missing[@]}"
    fi
}

need_browser_tools() {
    apt_install_missing chromium chromium chromedriver chromium-driver ngspice ngspice
    if [ ! -d node_modules/playwright-core ]; then
        log "installing playwright-core from package-lock.json (no browser download)"
        npm ci --no-audit --no-fund
    fi
}

build_page() {
    need_wasm_target
    need_bindgen
    log "building the wasm core (release)"
    # ROLLOFF_PAGE_RUSTFLAGS adds code-generation flags to the page's build, for size experiments
    # (RUSTFLAGS replaces the target's rustflags of .cargo/config.toml, so simd128 is repeated).
    # The release settings stay the page's: measured against them in Chromium (DEVELOPERS.md,
    # "The page's wasm"), `-C llvm-args=-inline-threshold=0 -C llvm-args=-unroll-threshold=30`
    # with dependencies at opt-level z cut the wasm by 13 % but made the study's kernel about
    # 1.4× slower; dependencies at opt-level z alone cut 2.5 % and made a plot's drawing 30 %
    # slower.
    if [ -n "${ROLLOFF_PAGE_RUSTFLAGS:-}" ]; then
        RUSTFLAGS="-C target-feature=+simd128 $ROLLOFF_PAGE_RUSTFLAGS" \
            cargo build --release --lib --target "$WASM_TARGET"
    else
        cargo build --release --lib --target "$WASM_TARGET"
    fi
    rm -rf "$PKG_DIR"
    mkdir -p "$PKG_DIR"
    wasm-bindgen --target no-modules --no-typescript --out-dir "$PKG_DIR" --out-name rolloff \
        "target/$WASM_TARGET/release/rolloff.wasm"
    local wasm="$PKG_DIR/rolloff_bg.wasm"
    if need_wasm_opt; then
        log "wasm-opt ${ROLLOFF_WASM_OPT_LEVEL:--O3}"
        "$BINARYEN_DIR/node_modules/.bin/wasm-opt" "${ROLLOFF_WASM_OPT_LEVEL:--O3}" "$wasm" -o "$PKG_DIR/rolloff_opt.wasm"
        wasm="$PKG_DIR/rolloff_opt.wasm"
    fi
    local tmp="$OUT_JS.tmp"
    {
        printf '/* Generated by build.sh from the Rolloff crate: do not edit, do not commit. */\n'
        cat "$PKG_DIR/rolloff.js"
        printf '\n/* The wasm core, inlined so the page needs no fetch (file:// blocks it). */\n'
        printf 'var ROLLOFF_WASM_BASE64 = "'
        base64 -w0 "$wasm"
        printf '";\n'
        cat <<'EOF'
/* When each step of opening finished, ms since navigation start (read by the benchmark). */
var rolloffOpening = { script: performance.now() };
/* The wasm core starts while its bytes are still being decoded: the base64 text is decoded in
 * pieces into a stream that V8 compiles as it arrives (streaming compilation works on other
 * threads), so decoding and compiling overlap instead of following each other. A browser without
 * streaming compilation or Uint8Array.fromBase64 decodes it whole and compiles the bytes. */
var rolloffReady = (function () {
  var text = ROLLOFF_WASM_BASE64;
  ROLLOFF_WASM_BASE64 = null;
  var PIECE = 1 << 18;   // base64 characters per piece (a multiple of 4): 192 kB of wasm
  function decodeWhole() {
    if (typeof Uint8Array.fromBase64 === 'function') return Uint8Array.fromBase64(text);
    var raw = atob(text);
    var bytes = new Uint8Array(raw.length);
    for (var i = 0; i < raw.length; i++) bytes[i] = raw.charCodeAt(i);
    return bytes;
  }
  var compiled;
  if (typeof WebAssembly.compileStreaming === 'function' && typeof Uint8Array.fromBase64 === 'function' &&
      typeof ReadableStream === 'function' && typeof Response === 'function') {
    var at = 0;
    var stream = new ReadableStream({
      pull: function (controller) {
        controller.enqueue(Uint8Array.fromBase64(text.slice(at, at + PIECE)));
        at += PIECE;
        if (at >= text.length) {
          text = null;
          rolloffOpening.decoded = performance.now();
          controller.close();
        }
      },
    });
    compiled = WebAssembly.compileStreaming(new Response(stream, { headers: { 'Content-Type': 'application/wasm' } }));
  } else {
    var bytes = decodeWhole();
    text = null;
    rolloffOpening.decoded = performance.now();
    compiled = WebAssembly.compile(bytes);
  }
  return compiled.then(function (module) {
    rolloffOpening.compiled = performance.now();
    return wasm_bindgen({ module_or_path: module });
  }).then(function () {
    rolloffOpening.instantiated = performance.now();
    return wasm_bindgen;
  });
})();
EOF
    } >"$tmp"
    mv "$tmp" "$OUT_JS"
    log "wrote $OUT_JS ($(wc -c <"$OUT_JS") bytes; wasm $(wc -c <"$wasm") bytes, $(gzip -9c "$wasm" | wc -c) gzipped)"
}

run_tests() {
    need_browser_tools
    log "formatting (cargo fmt --check)"
    cargo fmt --all -- --check
    log "native tests (cargo test): the core against scipy data, ngspice, IEC tables, physics;"
    log "this also writes target/wasm-reference.json for the wasm comparison"
    cargo test
    log "benchmarks compile (cargo bench --no-run)"
    cargo bench --no-run
    build_page
    log "building the command line (release) for the browser tests' reference outputs"
    cargo build --release --bin rolloff
    log "wasm tests in headless Chromium (wasm-bindgen-test): core under wasm = native"
    CHROMEDRIVER=/usr/bin/chromedriver cargo test --target "$WASM_TARGET" --test wasm
    log "browser acceptance tests (node --test tests/browser/)"
    node --test tests/browser/
}

case "${1:-build}" in
    build)
        build_page
        ;;
    serve)
        build_page
        port=${PORT:-8000}
        log "serving www/ on http://127.0.0.1:$port/ (Ctrl-C stops)"
        exec python3 -m http.server "$port" --bind 127.0.0.1 --directory www
        ;;
    test)
        run_tests
        ;;
    bench)
        need_browser_tools
        build_page
        node tests/browser/bench.js
        ;;
    *)
        log "usage: ./build.sh [build|serve|test|bench]"
        exit 2
        ;;
esac
