//! Diagnostics: every problem found in a spec, with its class, position and a hint.

use codespan_reporting::diagnostic::{Diagnostic as CsDiagnostic, Label};
use codespan_reporting::files::SimpleFile;
use codespan_reporting::term::{emit_into_string, Config};
use std::ops::Range;

/// One problem in a spec file.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Diagnostic {
    /// Stable class name (e.g. `unknown-symbol`), usable in tests and tooling.
    pub class: &'static str,
    /// What is wrong.
    pub message: String,
    /// Byte range in the file the problem points at.
    pub span: Range<usize>,
    /// Short label under the underlined text.
    pub label: String,
    /// How to fix it, when there is a clear way.
    pub hint: Option<String>,
}

impl Diagnostic {
    /// A diagnostic without a hint.
    pub fn new(class: &'static str, message: impl Into<String>, span: Range<usize>) -> Diagnostic {
        Diagnostic {
            class,
            message: message.into(),
            span,
            label: String::new(),
            hint: None,
        }
    }

    /// Adds the label printed under the span.
    pub fn label(mut self, label: impl Into<String>) -> Diagnostic {
        self.label = label.into();
        self
    }

    /// Adds a hint.
    pub fn hint(mut self, hint: impl Into<String>) -> Diagnostic {
        self.hint = Some(hint.into());
        self
    }

    /// 1-based line and column (in characters) of the start of the span in `source`.
    pub fn line_col(&self, source: &str) -> (usize, usize) {
        let start = self.span.start.min(source.len());
        let before = &source[..floor_char_boundary(source, start)];
        let line = before.matches('\n').count() + 1;
        let col = before.rsplit('\n').next().unwrap_or("").chars().count() + 1;
        (line, col)
    }
}

fn floor_char_boundary(s: &str, mut i: usize) -> usize {
    while i > 0 && !s.is_char_boundary(i) {
        i -= 1;
    }
    i
}

/// Renders diagnostics as plain text: `error[class]: message`, then `--> file:line:col`, the
/// source line with the span underlined, and the hint.
pub fn render(file_name: &str, source: &str, diagnostics: &[Diagnostic]) -> String {
    let file = SimpleFile::new(file_name, source);
    let config = Config::default();
    let mut out = String::new();
    for d in diagnostics {
        let start = floor_char_boundary(source, d.span.start.min(source.len()));
        let end = floor_char_boundary(source, d.span.end.clamp(start, source.len()));
        let mut cs = CsDiagnostic::error()
            .with_code(d.class)
            .with_message(&d.message)
            .with_labels(vec![Label::primary((), start..end).with_message(&d.label)]);
        if let Some(h) = &d.hint {
            cs = cs.with_notes(vec![format!("hint: {h}")]);
        }
        match emit_into_string(&config, &file, &cs) {
            Ok(s) => out.push_str(&s),
            Err(_) => {
                let (l, c) = d.line_col(source);
                out.push_str(&format!(
                    "error[{}]: {}\n  --> {file_name}:{l}:{c}\n",
                    d.class, d.message
                ));
            }
        }
    }
    out
}
