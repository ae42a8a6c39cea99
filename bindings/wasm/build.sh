#!/usr/bin/env bash
# Builds the genloom WebAssembly package:
#   bindings/wasm/pkg-web/   ES module for pages (`--target web`; `await init()` first)
#   bindings/wasm/pkg-node/  CommonJS module for Node and the tests (`--target nodejs`)
# Both are gitignored. Installs what is missing: the wasm32 target, `wasm-bindgen-cli` at the
# version pinned in Cargo.toml, and (through `npm ci`) binaryen's wasm-opt.
#
# The wasm build uses the crate's own `wasm` profile (opt-level "z", fat LTO, one codegen unit,
# panic=abort; the crate is its own workspace) and `simd128` (from .cargo/config.toml), without
# which tract has no wasm kernels.
# Environment: GENLOOM_WASM_OPT=0 skips wasm-opt; GENLOOM_WASM_OPT_LEVEL (default -Oz) picks
# its level; GENLOOM_WASM_PROFILE_OPT (0-3, s or z) overrides rustc's opt-level. The figures
# behind the defaults are in bindings/wasm/README.md.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)

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

echo "== trimmed tract crates (tract-patch/prepare.py)"
python3 "$here/tract-patch/prepare.py"

# Cargo reads .cargo/config.toml (target dir, simd128) from the folder it runs in.
cd "$here"
profile=()
if [ -n "${GENLOOM_WASM_PROFILE_OPT:-}" ]; then
  case "$GENLOOM_WASM_PROFILE_OPT" in
    [0-3]) optv=$GENLOOM_WASM_PROFILE_OPT ;;
    s | z) optv="\"$GENLOOM_WASM_PROFILE_OPT\"" ;;
    *) echo "build.sh: GENLOOM_WASM_PROFILE_OPT is '$GENLOOM_WASM_PROFILE_OPT', expected 0-3, s or z" >&2; exit 1 ;;
  esac
  profile=(--config "profile.wasm.opt-level=$optv")
fi
# An explicit RUSTFLAGS replaces the target rustflags of .cargo/config.toml: add simd128 to it.
if [ -n "${RUSTFLAGS:-}" ]; then
  export RUSTFLAGS="$RUSTFLAGS -C target-feature=+simd128"
fi

echo "== cargo build --target wasm32-unknown-unknown --profile wasm ${profile[*]:-} (simd128)"
cargo build --lib --target wasm32-unknown-unknown --profile wasm "${profile[@]}"
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
