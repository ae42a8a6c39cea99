//! The committed header is what cbindgen writes from the source now, and its version macros are
//! Cargo.toml's version. `GENLOOM_BLESS_HEADER=1` rewrites it instead of failing.

use std::path::{Path, PathBuf};

fn crate_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn version_macros() -> String {
    format!(
        "\n#define GENLOOM_VERSION_MAJOR {}\n#define GENLOOM_VERSION_MINOR {}\n#define GENLOOM_VERSION_PATCH {}\n\
         #define GENLOOM_VERSION_STRING \"{}\"",
        env!("CARGO_PKG_VERSION_MAJOR"),
        env!("CARGO_PKG_VERSION_MINOR"),
        env!("CARGO_PKG_VERSION_PATCH"),
        env!("CARGO_PKG_VERSION"),
    )
}

fn generate() -> String {
    let dir = crate_dir();
    let mut config = cbindgen::Config::from_file(dir.join("cbindgen.toml")).expect("cbindgen.toml parses");
    config.after_includes = Some(version_macros());
    let mut out = Vec::new();
    cbindgen::Builder::new()
        .with_config(config)
        .with_src(dir.join("src/lib.rs"))
        .generate()
        .expect("cbindgen generates the header")
        .write(&mut out);
    String::from_utf8(out).expect("the header is UTF-8")
}

fn header_path() -> PathBuf {
    crate_dir().join("include/genloom.h")
}

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()))
}

#[test]
fn header_matches_the_source() {
    let fresh = generate();
    let path = header_path();
    if std::env::var_os("GENLOOM_BLESS_HEADER").is_some() {
        std::fs::write(&path, &fresh).expect("write include/genloom.h");
        return;
    }
    let committed = read(&path);
    if committed != fresh {
        let line = committed.lines().zip(fresh.lines()).position(|(a, b)| a != b).map_or_else(
            || {
                format!(
                    "the files differ in length ({} vs {} lines)",
                    committed.lines().count(),
                    fresh.lines().count()
                )
            },
            |i| format!("first difference at line {}", i + 1),
        );
        panic!(
            "bindings/c/include/genloom.h is not what cbindgen writes from the source now ({line}); \
             regenerate it with `GENLOOM_BLESS_HEADER=1 cargo test -p genloom-c --test abi header_matches_the_source` and commit it"
        );
    }
}

#[test]
fn header_version_macros_match_cargo_toml() {
    let committed = read(&header_path());
    let want = [
        ("GENLOOM_VERSION_MAJOR", env!("CARGO_PKG_VERSION_MAJOR").to_string()),
        ("GENLOOM_VERSION_MINOR", env!("CARGO_PKG_VERSION_MINOR").to_string()),
        ("GENLOOM_VERSION_PATCH", env!("CARGO_PKG_VERSION_PATCH").to_string()),
        ("GENLOOM_VERSION_STRING", format!("\"{}\"", env!("CARGO_PKG_VERSION"))),
    ];
    for (name, value) in want {
        let found = committed
            .lines()
            .find_map(|l| l.strip_prefix(&format!("#define {name} ")).map(str::trim))
            .unwrap_or_else(|| panic!("include/genloom.h defines no {name}"));
        assert_eq!(found, value, "{name} in include/genloom.h is {found}, Cargo.toml's version says {value}");
    }
    // And the library reports the same version at run time.
    // SAFETY: genloom_version returns a static NUL-terminated string.
    let runtime = unsafe { std::ffi::CStr::from_ptr(genloom_c::genloom_version()) };
    assert_eq!(runtime.to_str().unwrap(), env!("CARGO_PKG_VERSION"));
}

#[test]
fn every_export_runs_in_the_boundary() {
    // Each `extern "C" fn` body must start in `boundary(` or `guard(`, or forward to `set(` or
    // `get(`, which do: that is where panics are caught and errors mapped.
    let mut exports = 0;
    for entry in std::fs::read_dir(crate_dir().join("src")).unwrap() {
        let path = entry.unwrap().path();
        let text = read(&path);
        let mut rest = text.as_str();
        while let Some(at) = rest.find("extern \"C\" fn ") {
            rest = &rest[at + "extern \"C\" fn ".len()..];
            let name: String = rest.chars().take_while(|c| c.is_alphanumeric() || *c == '_').collect();
            let body = &rest[rest.find('{').unwrap() + 1..];
            let code: Vec<&str> = body
                .lines()
                .map(str::trim)
                .filter(|l| !l.is_empty() && !l.starts_with("//"))
                .take(2)
                .collect();
            let start = code.join(" ");
            assert!(
                ["boundary(", "guard(", "unsafe { set(", "unsafe { get("]
                    .iter()
                    .any(|p| start.starts_with(p)),
                "{}: `{name}` does not start in the boundary helper: `{start}`",
                path.display()
            );
            exports += 1;
        }
    }
    assert!(exports >= 25, "found only {exports} exports");
}
