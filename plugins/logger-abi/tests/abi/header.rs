//! `include/veer.h` against the code: every declared function is exported with as many parameters,
//! every constant has the code's value, and every struct has the Rust struct's size and field
//! offsets (measured by a C program compiled from the header).

use crate::support::{compile_c_source, crate_dir, run_ok, temp};
use std::collections::BTreeMap;
use std::mem::{offset_of, size_of};
use std::process::Command;
use veer_abi::structs::{VeerCritical, VeerResult, VeerStats, VeerVector};

fn read(rel: &str) -> String {
    std::fs::read_to_string(crate_dir().join(rel)).expect("read a source file")
}

/// Drops `/* … */` and `// …` comments.
fn strip_comments(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    let mut rest = s;
    while let Some(i) = rest.find("/*") {
        out.push_str(&rest[..i]);
        rest = rest[i..].find("*/").map_or("", |j| &rest[i + j + 2..]);
    }
    out.push_str(rest);
    out.lines()
        .map(|l| l.split("//").next().unwrap_or(""))
        .collect::<Vec<_>>()
        .join("\n")
}

/// Function name → number of parameters, for each `PREFIXname(…)` in `text` (`PREFIX` stands for
/// `veer_`).
fn functions(text: &str, prefix: &str) -> BTreeMap<String, usize> {
    let mut out = BTreeMap::new();
    let mut rest = text;
    while let Some(i) = rest.find(prefix) {
        let after = &rest[i + prefix.len()..];
        let name_len = after
            .find(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
            .unwrap_or(after.len());
        let boundary = rest[..i]
            .chars()
            .next_back()
            .is_none_or(|c| !(c.is_ascii_alphanumeric() || c == '_'));
        let name = format!("veer_{}", &after[..name_len]);
        let tail = &after[name_len..];
        if let (true, Some(args)) = (boundary, tail.strip_prefix('(')) {
            let close = args.find(')').expect("a closing parenthesis");
            let inner = args[..close].trim();
            let n = if inner.is_empty() || inner == "void" {
                0
            } else {
                inner.split(',').filter(|p| !p.trim().is_empty()).count()
            };
            out.insert(name, n);
        }
        rest = &after[name_len..];
    }
    out
}

#[test]
fn every_declared_function_is_exported_with_its_parameters() {
    let header = strip_comments(&read("include/veer.h"));
    let decls = functions(
        &header
            .lines()
            .filter(|l| !l.trim_start().starts_with('#'))
            .collect::<Vec<_>>()
            .join("\n"),
        "veer_",
    );
    let src = read("src/exports.rs");
    let exports = functions(&src.replace("pub extern \"C\" fn veer_", "@@"), "@@");
    assert!(decls.len() >= 15, "parsed {decls:?}");
    assert_eq!(decls, exports, "veer.h and src/exports.rs disagree");
    // Every export is `#[no_mangle]`.
    assert_eq!(
        src.matches("#[no_mangle]\npub extern \"C\" fn").count(),
        exports.len(),
        "an export without #[no_mangle]"
    );
}

#[test]
fn the_exports_module_has_no_unsafe_block() {
    let src = strip_comments(&read("src/exports.rs"));
    assert!(!src.contains("unsafe {") && !src.contains("unsafe fn"));
}

#[test]
fn every_constant_has_the_codes_value() {
    use veer_abi::status::*;
    use veer_abi::structs::*;
    let code: BTreeMap<&str, i64> = [
        (
            "VEER_ABI_VERSION_MAJOR",
            i64::from(veer_abi::VEER_ABI_VERSION_MAJOR),
        ),
        (
            "VEER_ABI_VERSION_MINOR",
            i64::from(veer_abi::VEER_ABI_VERSION_MINOR),
        ),
        ("VEER_OK", i64::from(VEER_OK)),
        ("VEER_E_HANDLE", i64::from(VEER_E_HANDLE)),
        ("VEER_E_NULL", i64::from(VEER_E_NULL)),
        ("VEER_E_CONFIG", i64::from(VEER_E_CONFIG)),
        ("VEER_E_LENGTH", i64::from(VEER_E_LENGTH)),
        ("VEER_E_NONFINITE", i64::from(VEER_E_NONFINITE)),
        ("VEER_E_ARGUMENT", i64::from(VEER_E_ARGUMENT)),
        ("VEER_E_BUFFER", i64::from(VEER_E_BUFFER)),
        ("VEER_E_INTERNAL", i64::from(VEER_E_INTERNAL)),
        ("VEER_RESULT_REVOLUTION", i64::from(VEER_RESULT_REVOLUTION)),
        ("VEER_RESULT_STATE", i64::from(VEER_RESULT_STATE)),
        ("VEER_RESULT_EVENT", i64::from(VEER_RESULT_EVENT)),
        ("VEER_RESULT_TACH_LOST", i64::from(VEER_RESULT_TACH_LOST)),
        ("VEER_RESULT_GAP", i64::from(VEER_RESULT_GAP)),
        (
            "VEER_CRITICAL_HEAVILY_DAMPED",
            i64::from(VEER_CRITICAL_HEAVILY_DAMPED),
        ),
        ("VEER_CRITICAL_FIT", i64::from(VEER_CRITICAL_FIT)),
        ("VEER_CRITICAL_MARGIN", i64::from(VEER_CRITICAL_MARGIN)),
    ]
    .into_iter()
    .collect();
    let header = strip_comments(&read("include/veer.h"));
    let mut seen = 0;
    for line in header.lines() {
        let mut w = line.split_whitespace();
        if w.next() != Some("#define") {
            continue;
        }
        let (Some(name), Some(value)) = (w.next(), w.next()) else {
            continue;
        };
        let Some(&want) = code.get(name) else {
            continue;
        };
        let v: i64 = value
            .trim_matches(|c| c == '(' || c == ')')
            .trim_end_matches('u')
            .parse()
            .expect("a number");
        assert_eq!(v, want, "{name}");
        seen += 1;
    }
    assert_eq!(seen, code.len(), "constants missing from veer.h");
    // The state, side and verdict codes are checked by the struct test's C program below only
    // through the result values; their numbers are listed in structs.rs next to the match arms.
}

/// Struct name, Rust size, and (field, Rust offset) in declaration order.
type Layout = (&'static str, usize, Vec<(&'static str, usize)>);

fn layouts() -> Vec<Layout> {
    macro_rules! fields {
        ($t:ty; $($f:ident),*) => { vec![$((stringify!($f), offset_of!($t, $f))),*] };
    }
    vec![
        (
            "veer_vector",
            size_of::<VeerVector>(),
            fields!(VeerVector; channel, order, amplitude, phase_deg, re, im),
        ),
        (
            "veer_critical",
            size_of::<VeerCritical>(),
            fields!(VeerCritical; channel, flags, speed_rpm, peak_amplitude, phase_deg,
                amplification_factor, damping_ratio, phase_change_deg, n1_rpm, n2_rpm,
                fit_natural_rpm, fit_damping_ratio, margin_side, margin_verdict,
                required_margin_pct, actual_margin_pct),
        ),
        (
            "veer_result",
            size_of::<VeerResult>(),
            fields!(VeerResult; kind, state, from_state, event_kind, time_s, speed_rpm, start_s,
                speed_start_rpm, sweep_rate_rpm_s, vectors, vectors_cap, n_vectors, criticals,
                criticals_cap, n_criticals),
        ),
        (
            "veer_stats",
            size_of::<VeerStats>(),
            fields!(VeerStats; frames, revolutions, vectors, pulses, pulses_inserted,
                pulses_dropped, tach_losses, gaps, results_dropped, pending),
        ),
    ]
}

/// Field names of `typedef struct NAME { … }` in the header, in order.
fn header_fields(header: &str, name: &str) -> Vec<String> {
    let start = header
        .find(&format!("typedef struct {name} {{"))
        .unwrap_or_else(|| panic!("struct {name} in veer.h"));
    let body = &header[start..];
    let body = &body[body.find('{').expect("{") + 1..body.find('}').expect("}")];
    body.split(';')
        .filter_map(|decl| {
            let decl = decl.trim();
            (!decl.is_empty()).then(|| {
                decl.rsplit(|c: char| c.is_whitespace() || c == '*')
                    .next()
                    .expect("a field name")
                    .to_string()
            })
        })
        .flat_map(|d| {
            d.split(',')
                .map(|s| s.trim().to_string())
                .collect::<Vec<_>>()
        })
        .collect()
}

#[test]
fn every_struct_has_the_rust_layout() {
    let header = strip_comments(&read("include/veer.h"));
    let mut c = String::from(
        "#include \"veer.h\"\n#include <stdio.h>\n#include <stddef.h>\nint main(void) {\n",
    );
    let mut want = String::new();
    for (name, size, fields) in layouts() {
        let names: Vec<String> = header_fields(&header, name);
        let rust: Vec<&str> = fields.iter().map(|(f, _)| *f).collect();
        assert_eq!(names, rust, "fields of {name}");
        c.push_str(&format!("printf(\"{name} %zu\\n\", sizeof({name}));\n"));
        want.push_str(&format!("{name} {size}\n"));
        for (f, off) in fields {
            c.push_str(&format!(
                "printf(\"{name}.{f} %zu\\n\", offsetof({name}, {f}));\n"
            ));
            want.push_str(&format!("{name}.{f} {off}\n"));
        }
    }
    c.push_str("return 0;\n}\n");
    let tmp = temp();
    let exe = compile_c_source("layout", &c, tmp.path());
    let out = run_ok(&mut Command::new(exe));
    assert_eq!(String::from_utf8_lossy(&out.stdout), want);
}
