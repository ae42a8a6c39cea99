#!/usr/bin/env bash
# Builds the genloom WebAssembly package:
#   bindings/wasm/pkg-web/   ES module for pages (`--target web`; `await init()` first)
#   bindings/wasm/pkg-node/  CommonJS module for Node and the tests (`--target nodejs`)
# Both are gitignored. Installs what is missing: the wasm32 target, `wasm-bindgen-cli` at the
# version pinned in Cargo.toml, and (through `npm ci`) binaryen's wasm-opt.
#
# The wasm build uses a size profile passed on the command line (the root Cargo.toml's profiles
# are shared by the whole workspace) and `simd128`, without which tract has no wasm kernels.
# Environment: GENLOOM_WASM_OPT=0 skips wasm-opt; GENLOOM_WASM_OPT_LEVEL (default -Oz) picks
# its level; GENLOOM_WASM_PROFILE_OPT (default s) is rustc's opt-level (0-3, s or z). The
# figures behind the defaults are in bindings/wasm/README.md.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
cd "$root"

want=$(sed -n 's/^wasm-bindgen = "=\(.*\)"/\1/p' "$here/Cargo.toml")
[ -n "$want" ] || { echo "build.sh: cannot read the pinned wasm-bindgen version from Cargo.toml" >&2; exit 1; }

if ! rustup target list --installed | grep -qx wasm32-unknown-unknown; then
  echo "== rustup target add wasm32-unknown-unknown"
  rustup target add wasm32-unknown-unknown
fi
have=$(wasm-bindgen --version 2>/dev/null | awk '{print $2}' || true)
if [ "$have" != "$want" ]; then
  echo "== cargo install wasm-bindgen-cli $want (have: ${have:-none})"
  # --locked first, as the CLI's authors tested it; without it when a locked dependency is not
  # served by the registry (the CLI's lock file names a webpki-roots release that is not here).
  cargo install --locked --version "$want" wasm-bindgen-cli \
    || cargo install --version "$want" wasm-bindgen-cli
fi

opt=${GENLOOM_WASM_PROFILE_OPT:-s}
case "$opt" in
  [0-3]) optv=$opt ;;
  s | z) optv="\"$opt\"" ;;
  *) echo "build.sh: GENLOOM_WASM_PROFILE_OPT is '$opt', expected 0-3, s or z" >&2; exit 1 ;;
esac
profile=(
  --config 'profile.wasm.inherits="release"'
  --config "profile.wasm.opt-level=$optv"
  --config 'profile.wasm.lto="fat"'
  --config 'profile.wasm.codegen-units=1'
  --config 'profile.wasm.panic="abort"'
  --config 'profile.wasm.debug=false'
  --config 'profile.wasm.incremental=false'
)
# An explicit RUSTFLAGS replaces target rustflags from config, so add simd128 to it instead.
if [ -n "${RUSTFLAGS:-}" ]; then
  export RUSTFLAGS="$RUSTFLAGS -C target-feature=+simd128"
  flags=()
else
  flags=(--config 'target.wasm32-unknown-unknown.rustflags=["-C", "target-feature=+simd128"]')
fi

echo "== cargo build -p genloom-wasm --target wasm32-unknown-unknown (profile wasm: opt-level $opt, fat LTO, simd128)"
cargo build -p genloom-wasm --lib --target wasm32-unknown-unknown --profile wasm "${profile[@]}" "${flags[@]}"
raw="$root/target/wasm32-unknown-unknown/wasm/genloom_wasm.wasm"
[ -f "$raw" ] || { echo "build.sh: $raw was not written" >&2; exit 1; }

echo "== wasm-bindgen $want (web, nodejs)"
rm -rf "$here/pkg-web" "$here/pkg-node"
wasm-bindgen "$raw" --target web --out-dir "$here/pkg-web" --out-name genloom_wasm
wasm-bindgen "$raw" --target nodejs --out-dir "$here/pkg-node" --out-name genloom_wasm
# bindings/wasm/package.json says "type": "module" (for the tests and tools); the nodejs build is
# CommonJS, and each folder says what it is.
printf '{ "type": "commonjs" }\n' >"$here/pkg-node/package.json"
printf '{ "type": "module" }\n' >"$here/pkg-web/package.json"

wasm_opt="$here/node_modules/.bin/wasm-opt"
if [ "${GENLOOM_WASM_OPT:-1}" != "0" ]; then
  if [ ! -x "$wasm_opt" ] && command -v npm >/dev/null; then
    echo "== npm ci (binaryen's wasm-opt)"
    (cd "$here" && npm ci --no-audit --no-fund)
  fi
  if [ -x "$wasm_opt" ]; then
    level=${GENLOOM_WASM_OPT_LEVEL:--Oz}
    echo "== wasm-opt $level"
    # The features rustc enables for wasm32-unknown-unknown, plus simd128.
    features=(--enable-simd --enable-bulk-memory --enable-nontrapping-float-to-int --enable-sign-ext
      --enable-mutable-globals --enable-reference-types --enable-multivalue)
    # wasm-bindgen writes the same module for both targets (only the JS glue differs):
    # optimise it once and copy it.
    f="$here/pkg-web/genloom_wasm_bg.wasm"
    cmp -s "$f" "$here/pkg-node/genloom_wasm_bg.wasm" || { echo "build.sh: the two modules differ" >&2; exit 1; }
    "$wasm_opt" "$level" "${features[@]}" "$f" -o "$f.opt"
    mv "$f.opt" "$f"
    cp "$f" "$here/pkg-node/genloom_wasm_bg.wasm"
  else
    echo "build.sh: wasm-opt not found (run npm ci in bindings/wasm); the module is not optimised further" >&2
  fi
fi

size() { printf '%s bytes raw, %s bytes gzipped (-9)' "$(wc -c <"$1")" "$(gzip -9c "$1" | wc -c)"; }
echo "== sizes"
echo "  cargo output:        $(size "$raw")"
echo "  pkg-web .wasm:       $(size "$here/pkg-web/genloom_wasm_bg.wasm")"
echo "  pkg-node .wasm:      $(size "$here/pkg-node/genloom_wasm_bg.wasm")"
