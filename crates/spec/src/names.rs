//! Names a spec may not use: reserved words of the languages lawsmith emits, and the names of
//! the formula language itself.

/// Rust keywords (strict, reserved and weak keywords that matter in item position).
pub const RUST_RESERVED: &[&str] = &[
    "as", "async", "await", "break", "const", "continue", "crate", "dyn", "else", "enum", "extern",
    "false", "fn", "for", "if", "impl", "in", "let", "loop", "match", "mod", "move", "mut", "pub",
    "ref", "return", "self", "Self", "static", "struct", "super", "trait", "true", "type",
    "unsafe", "use", "where", "while", "abstract", "become", "box", "do", "final", "macro",
    "override", "priv", "typeof", "unsized", "virtual", "yield", "try", "union", "gen",
];

/// C99 keywords, plus the identifiers the C headers lawsmith includes would shadow.
pub const C_RESERVED: &[&str] = &[
    "auto",
    "break",
    "case",
    "char",
    "const",
    "continue",
    "default",
    "do",
    "double",
    "else",
    "enum",
    "extern",
    "float",
    "for",
    "goto",
    "if",
    "inline",
    "int",
    "long",
    "register",
    "restrict",
    "return",
    "short",
    "signed",
    "sizeof",
    "static",
    "struct",
    "switch",
    "typedef",
    "union",
    "unsigned",
    "void",
    "volatile",
    "while",
    "_Bool",
    "_Complex",
    "_Imaginary",
    "bool",
    "true",
    "false",
    "NULL",
    "NAN",
    "INFINITY",
    "fabs",
    "fmin",
    "fmax",
    "pow",
    "log",
    "exp",
    "sqrt",
    "sin",
    "cos",
    "tan",
    "asin",
    "acos",
    "atan",
    "atan2",
    "isnan",
    "isfinite",
];

/// Why `name` cannot be used as a symbol, if it cannot.
pub fn reserved_reason(name: &str) -> Option<String> {
    if name == "ref" || name == "ddt" || lawsmith_expr::Func::from_name(name).is_some() {
        return Some(format!("`{name}` is a function of the formula language"));
    }
    let rust = RUST_RESERVED.contains(&name);
    let c = C_RESERVED.contains(&name);
    match (rust, c) {
        (true, true) => Some(format!("`{name}` is reserved in both Rust and C")),
        (true, false) => Some(format!("`{name}` is a reserved word in Rust")),
        (false, true) => Some(format!("`{name}` is reserved in C")),
        (false, false) => None,
    }
}

/// Why `name` is not a valid identifier, if it is not.
pub fn identifier_problem(name: &str) -> Option<String> {
    let mut chars = name.chars();
    let Some(first) = chars.next() else {
        return Some("the name is empty".into());
    };
    if let Some(c) = name.chars().find(|c| !c.is_ascii()) {
        return Some(format!(
            "`{name}` contains the non-ASCII character `{c}` (U+{:04X}); names use ASCII letters, digits and `_` so they are valid in Rust and C",
            c as u32
        ));
    }
    if !(first.is_ascii_alphabetic() || first == '_') {
        return Some(format!("`{name}` must start with a letter or `_`"));
    }
    if let Some(c) = chars.find(|c| !(c.is_ascii_alphanumeric() || *c == '_')) {
        return Some(format!(
            "`{name}` contains `{c}`; use letters, digits and `_`"
        ));
    }
    if name.starts_with("__") || name.starts_with("ls_") {
        return Some(format!(
            "`{name}` starts with a prefix reserved for generated code (`__` or `ls_`)"
        ));
    }
    None
}
