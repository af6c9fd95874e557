//! The Rust emitter: tokens built with `quote`, checked by parsing them with `syn`, formatted
//! with `prettyplease`. The module uses only `core` and the `libm` crate, so it builds in a
//! `#![no_std]` crate.

use crate::controller::Controller;
use crate::header::{float_literal, Provenance};
use crate::ir::{Op, Program, Slot};
use crate::Float;
use lawsmith_expr::Func;
use proc_macro2::{Ident, Span, TokenStream};
use quote::{format_ident, quote};

fn ident(s: &str) -> Ident {
    Ident::new(s, Span::call_site())
}

struct Emit {
    float: Float,
}

impl Emit {
    fn ty(&self) -> TokenStream {
        match self.float {
            Float::F32 => quote!(f32),
            Float::F64 => quote!(f64),
        }
    }

    /// A reference at rest at `command` (an expression): clamped into the range, a NaN at
    /// its midpoint, as `Controller::start` computes it.
    fn at_rest(&self, range: (f64, f64), command: TokenStream) -> TokenStream {
        let (lo, hi) = self.ends(range);
        let mid = self.lit(crate::controller::midpoint(range));
        quote!(if #command.is_nan() { #mid } else { clamp_to(#command, #lo, #hi) })
    }

    /// A range's ends as literals, rounded inward for this float type.
    fn ends(&self, range: (f64, f64)) -> (TokenStream, TokenStream) {
        let (lo, hi) = self.float.inward(range);
        (self.lit(lo), self.lit(hi))
    }

    fn lit(&self, x: f64) -> TokenStream {
        let text = match self.float {
            Float::F32 => {
                let s = format!("{:?}", x as f32);
                if s.contains('.') || s.contains('e') {
                    s
                } else {
                    format!("{s}.0")
                }
            }
            Float::F64 => float_literal(x),
        };
        let abs = text.trim_start_matches('-');
        let tok: TokenStream = abs.parse().expect("a float literal");
        // a unary minus binds tighter than every operator the emitter puts around literals
        if text.starts_with('-') {
            quote!(-#tok)
        } else {
            tok
        }
    }

    fn func(&self, f: Func) -> Ident {
        ident(&crate::math_name(f, self.float))
    }

    /// The statements of a program; `input(i)` gives the expression of input `i`. Returns the
    /// statements and the expression of each output.
    fn program(
        &self,
        p: &Program,
        input: &dyn Fn(usize) -> TokenStream,
    ) -> (TokenStream, Vec<TokenStream>) {
        let ty = self.ty();
        let name = |s: Slot| -> TokenStream {
            match p.ops[s as usize] {
                Op::Input(i) => input(i),
                _ => {
                    let t = format_ident!("{}", p.names[s as usize]);
                    quote!(#t)
                }
            }
        };
        let mut body = TokenStream::new();
        for (i, op) in p.ops.iter().enumerate() {
            let value = match op {
                Op::Input(_) => continue,
                Op::Const(c) => self.lit(*c),
                Op::Neg(a) => {
                    let a = name(*a);
                    quote!(-#a)
                }
                Op::Add(a, b) => {
                    let (a, b) = (name(*a), name(*b));
                    quote!(#a + #b)
                }
                Op::Sub(a, b) => {
                    let (a, b) = (name(*a), name(*b));
                    quote!(#a - #b)
                }
                Op::Mul(a, b) => {
                    let (a, b) = (name(*a), name(*b));
                    quote!(#a * #b)
                }
                Op::Div(a, b) => {
                    let (a, b) = (name(*a), name(*b));
                    quote!(#a / #b)
                }
                Op::Call1(f, a) => {
                    let (f, a) = (self.func(*f), name(*a));
                    quote!(libm::#f(#a))
                }
                Op::Call2(f, a, b) => {
                    let (f, a, b) = (self.func(*f), name(*a), name(*b));
                    quote!(libm::#f(#a, #b))
                }
                Op::Pow(a, b) => {
                    let f = ident(&crate::with_float("pow", self.float));
                    let (a, b) = (name(*a), name(*b));
                    quote!(libm::#f(#a, #b))
                }
                Op::Clamp(a, lo, hi) => {
                    let (a, (lo, hi)) = (name(*a), self.ends((*lo, *hi)));
                    quote!(clamp_to(#a, #lo, #hi))
                }
                Op::Select(c, a, b) => {
                    let (c, a, b) = (name(*c), name(*a), name(*b));
                    let zero = self.lit(0.0);
                    quote!(if #c >= #zero { #a } else { #b })
                }
            };
            let t = format_ident!("{}", p.names[i]);
            body.extend(quote!(let #t: #ty = #value;));
        }
        let outs = p.outputs.iter().map(|(_, s)| name(*s)).collect();
        (body, outs)
    }
}

/// The generated Rust module for a controller.
pub fn emit(c: &Controller, prov: &Provenance, float: Float) -> Result<String, String> {
    let e = Emit { float };
    let ty = e.ty();
    let field = |n: &str| ident(n);
    let inputs = c.input_names();
    let input_fields: Vec<Ident> = inputs.iter().map(|n| field(n)).collect();
    let gain_fields: Vec<Ident> = c.gains.iter().map(|g| field(&g.name)).collect();
    let gain_defaults: Vec<TokenStream> = c.gains.iter().map(|g| e.lit(g.default)).collect();
    let act_fields: Vec<Ident> = c.actuators.iter().map(|a| field(&a.name)).collect();
    let doc_input: Vec<String> = c
        .states
        .iter()
        .map(|s| format!("State `{}` [{}].", s.name, s.unit))
        .chain(
            c.references
                .iter()
                .chain(&c.rates)
                .chain(&c.signals)
                .map(|r| {
                    format!(
                        "`{}` [{}], proved over [{}, {}].",
                        r.name, r.unit, r.range.0, r.range.1
                    )
                }),
        )
        .collect();
    let doc_gain: Vec<String> = c
        .gains
        .iter()
        .map(|g| {
            format!(
                "Gain `{}` [{}], proved over [{}, {}].",
                g.name, g.unit, g.range.0, g.range.1
            )
        })
        .collect();
    let doc_act: Vec<String> = c
        .actuators
        .iter()
        .map(|a| {
            format!(
                "Command `{}` [{}], saturated to [{}, {}].",
                a.name, a.unit, a.limits.0, a.limits.1
            )
        })
        .collect();

    // flags
    let mut flag_items = TokenStream::new();
    for (i, (n, what)) in crate::controller::STATUS.iter().enumerate() {
        if *n == "MEMORY_REPAIRED" && c.memory.is_empty() {
            continue;
        }
        let name = format_ident!("STATUS_{}", n);
        let bit = proc_macro2::Literal::u32_unsuffixed(1u32 << i);
        let doc = format!("`status` bit: {what}.");
        flag_items.extend(quote! {
            #[doc = #doc]
            pub const #name: u32 = #bit;
        });
    }
    for (i, a) in c.actuators.iter().enumerate() {
        let lo = format_ident!("LIMIT_{}_LOW", a.name.to_uppercase());
        let hi = format_ident!("LIMIT_{}_HIGH", a.name.to_uppercase());
        let (bl, bh) = (
            proc_macro2::Literal::u32_unsuffixed(1u32 << (2 * i)),
            proc_macro2::Literal::u32_unsuffixed(1u32 << (2 * i + 1)),
        );
        let dl = format!(
            "`limits` bit: `{}` was below {} and is saturated to it.",
            a.name, a.limits.0
        );
        let dh = format!(
            "`limits` bit: `{}` was above {} and is saturated to it.",
            a.name, a.limits.1
        );
        flag_items.extend(quote! {
            #[doc = #dl]
            pub const #lo: u32 = #bl;
            #[doc = #dh]
            pub const #hi: u32 = #bh;
        });
    }

    // the envelope guards of compute_commands()
    let ns = c.states.len();
    let (nr, nt) = (c.references.len(), c.rates.len());
    let mut guards = TokenStream::new();
    let x = |i: usize| format_ident!("x{}", i);
    for (i, n) in inputs.iter().enumerate() {
        let (xi, f) = (x(i), field(n));
        guards.extend(quote!(let mut #xi: #ty = reading.#f;));
    }
    // each state's reference as given, before it is clamped: the error is measured from it
    for (i, s) in c.states.iter().enumerate() {
        if let Some(r) = s.reference {
            let (raw, xr) = (format_ident!("r{}", i), x(ns + r));
            guards.extend(quote!(let #raw: #ty = #xr;));
        }
    }
    let ranged = c.references.iter().chain(&c.rates).chain(&c.signals);
    for (j, r) in ranged.enumerate() {
        let xi = x(ns + j);
        let (lo, hi) = e.ends(r.range);
        let mid = e.lit(crate::controller::midpoint(r.range));
        guards.extend(quote! {
            if !(#xi >= #lo && #xi <= #hi) {
                status |= if #xi.is_finite() { STATUS_OUTSIDE_ENVELOPE } else { STATUS_NONFINITE_INPUT };
                #xi = if #xi.is_nan() { #mid } else { clamp_to(#xi, #lo, #hi) };
            }
        });
    }
    for (i, s) in c.states.iter().enumerate() {
        let xi = x(i);
        let err = format_ident!("e{}", i);
        let base = match s.reference {
            Some(r) => {
                let xr = x(ns + r);
                quote!(#xr)
            }
            None => e.lit(s.equilibrium),
        };
        let (lo, hi) = e.ends(s.error);
        let zero = e.lit(crate::ir::clamp(0.0, s.error.0, s.error.1));
        let guard = quote! {
            if !(#err >= #lo && #err <= #hi) {
                status |= if #err.is_finite() { STATUS_OUTSIDE_ENVELOPE } else { STATUS_NONFINITE_INPUT };
                #xi = #base + if #err.is_nan() { #zero } else { clamp_to(#err, #lo, #hi) };
            }
        };
        if s.reference.is_some() {
            let raw = format_ident!("r{}", i);
            guards.extend(quote! {
                let #err = #xi - #raw;
                #guard else if #base != #raw {
                    #xi = #base + #err;
                }
            });
        } else {
            guards.extend(quote! {
                let #err = #xi - #base;
                #guard
            });
        }
    }
    let _ = nt;
    let _ = nr;

    // check_gains()
    let mut checks: Vec<TokenStream> = c
        .gains
        .iter()
        .map(|g| {
            let f = field(&g.name);
            let (lo, hi) = e.ends(g.range);
            quote!(g.#f >= #lo && g.#f <= #hi)
        })
        .collect();
    let (cprog, strict) = &c.constraints;
    let (cbody, couts) = e.program(cprog, &|i| {
        let f = field(&c.gains[i].name);
        quote!(g.#f)
    });
    for (o, s) in couts.iter().zip(strict) {
        let zero = e.lit(0.0);
        checks.push(if *s {
            quote!(#o < #zero)
        } else {
            quote!(#o <= #zero)
        });
    }
    let checks = if checks.is_empty() {
        quote!(true)
    } else {
        quote!(#(#checks)&&*)
    };

    // the controller states, each within its limits (a NaN restarts at its initial value)
    let n_mem = c.memory.len();
    let mut memory_guards = TokenStream::new();
    for (j, m) in c.memory.iter().enumerate() {
        let (mj, f) = (format_ident!("m{}", j), field(&m.name));
        let (lo, hi) = e.ends(m.limits);
        let init = e.lit(m.initial);
        memory_guards.extend(quote! {
            let mut #mj: #ty = memory.#f;
            if !(#mj >= #lo && #mj <= #hi) {
                status |= STATUS_MEMORY_REPAIRED;
                #mj = if #mj.is_nan() { #init } else { clamp_to(#mj, #lo, #hi) };
            }
        });
    }

    // the law
    let (lbody, louts) = e.program(&c.law, &|i| {
        if i < inputs.len() {
            let xi = x(i);
            quote!(#xi)
        } else if i < inputs.len() + n_mem {
            let mj = format_ident!("m{}", i - inputs.len());
            quote!(#mj)
        } else {
            let f = field(&c.gains[i - inputs.len() - n_mem].name);
            quote!(g.#f)
        }
    });
    // the controller states over dt: forward Euler, held within their limits
    let mut advance = TokenStream::new();
    let mut held_items = TokenStream::new();
    for (j, (m, u)) in c.memory.iter().zip(&louts[c.actuators.len()..]).enumerate() {
        let (mj, nj, f) = (
            format_ident!("m{}", j),
            format_ident!("n{}", j),
            field(&m.name),
        );
        let (lo, hi) = e.ends(m.limits);
        let (hl, hh) = (
            format_ident!("HELD_{}_LOW", m.name.to_uppercase()),
            format_ident!("HELD_{}_HIGH", m.name.to_uppercase()),
        );
        let zero = e.lit(0.0);
        advance.extend(quote! {
            if dt > #zero {
                let mut #nj: #ty = #mj + dt * #u;
                if !#nj.is_finite() {
                    status |= STATUS_MEMORY_REPAIRED;
                    #nj = #mj;
                }
                if #nj < #lo {
                    #nj = #lo;
                    memory_limits |= #hl;
                } else if #nj > #hi {
                    #nj = #hi;
                    memory_limits |= #hh;
                }
                memory.#f = #nj;
            } else {
                memory.#f = #mj;
            }
        });
        let (bl, bh) = (
            proc_macro2::Literal::u32_unsuffixed(1u32 << (2 * j)),
            proc_macro2::Literal::u32_unsuffixed(1u32 << (2 * j + 1)),
        );
        let dl = format!(
            "`memory_limits` bit: `{}` was held at its lower limit {}.",
            m.name, m.limits.0
        );
        let dh = format!(
            "`memory_limits` bit: `{}` was held at its upper limit {}.",
            m.name, m.limits.1
        );
        held_items.extend(quote! {
            #[doc = #dl]
            pub const #hl: u32 = #bl;
            #[doc = #dh]
            pub const #hh: u32 = #bh;
        });
    }
    let mut saturate = TokenStream::new();
    let mut cmd_names = Vec::new();
    for (i, (a, out)) in c.actuators.iter().zip(&louts).enumerate() {
        let ci = format_ident!("c{}", i);
        let ((lo, hi), safe) = (e.ends(a.limits), e.lit(a.safe));
        let (fl, fh) = (
            format_ident!("LIMIT_{}_LOW", a.name.to_uppercase()),
            format_ident!("LIMIT_{}_HIGH", a.name.to_uppercase()),
        );
        saturate.extend(quote! {
            let mut #ci: #ty = #out;
            if !#ci.is_finite() {
                status |= STATUS_NONFINITE_COMMAND;
                #ci = #safe;
            }
            if #ci < #lo {
                #ci = #lo;
                limits |= #fl;
            } else if #ci > #hi {
                #ci = #hi;
                limits |= #fh;
            }
        });
        cmd_names.push(ci);
    }

    // guidance
    let mut guidance_items = TokenStream::new();
    if !c.filters.is_empty() {
        let gfields: Vec<Ident> = c
            .filters
            .iter()
            .flat_map(|f| [field(&c.references[f.reference].name), field(&f.rate)])
            .collect();
        let gdocs: Vec<String> = c
            .filters
            .iter()
            .flat_map(|f| {
                let r = &c.references[f.reference];
                [
                    format!("Reference `{}` [{}].", r.name, r.unit),
                    format!(
                        "Its rate `{}`, limited to [{}, {}].",
                        f.rate, f.rate_limit.0, f.rate_limit.1
                    ),
                ]
            })
            .collect();
        let cfields: Vec<Ident> = c.filters.iter().map(|f| field(&f.command)).collect();
        let unsuffixed = proc_macro2::Literal::usize_unsuffixed;
        let ng = unsuffixed(gfields.len());
        let nc = unsuffixed(cfields.len());
        let gidx: Vec<proc_macro2::Literal> = (0..gfields.len()).map(unsuffixed).collect();
        let cidx: Vec<proc_macro2::Literal> = (0..cfields.len()).map(unsuffixed).collect();
        let gnames: Vec<String> = gfields.iter().map(|f| f.to_string()).collect();
        let cnames: Vec<String> = cfields.iter().map(|f| f.to_string()).collect();
        let mut blocks = TokenStream::new();
        for f in &c.filters {
            let (rf, qf, cf) = (
                field(&c.references[f.reference].name),
                field(&f.rate),
                field(&f.command),
            );
            let kf = field(&c.gains[f.gain].name);
            let (body, outs) = e.program(&f.program, &|i| match i {
                0 => quote!(r),
                1 => quote!(c),
                2 => quote!(k),
                _ => quote!(dt),
            });
            let (o_r, o_q) = (&outs[0], &outs[1]);
            let rest = e.at_rest(c.references[f.reference].range, quote!(targets.#cf));
            blocks.extend(quote! {
                {
                    let mut r: #ty = state.#rf;
                    if !r.is_finite() {
                        status |= STATUS_GUIDANCE_REPAIRED;
                        r = #rest;
                    }
                    let c: #ty = if targets.#cf.is_nan() { r } else { targets.#cf };
                    let k: #ty = g.#kf;
                    #body
                    state.#rf = #o_r;
                    state.#qf = #o_q;
                }
            });
        }
        let starts: Vec<TokenStream> = c
            .filters
            .iter()
            .map(|f| {
                let r = &c.references[f.reference];
                let (rf, qf, cf) = (field(&r.name), field(&f.rate), field(&f.command));
                let (rest, zero) = (e.at_rest(r.range, quote!(at.#cf)), e.lit(0.0));
                quote! {
                    #rf: #rest,
                    #qf: #zero,
                }
            })
            .collect();
        guidance_items = quote! {
            /// The reference filters' state: each reference and its rate. Start it with
            /// [`References::start`]. Each control period: [`compute_commands`] with the
            /// references and rates of this state in its reading, then
            /// [`advance_references`] over the period.
            #[derive(Clone, Copy, Debug, PartialEq)]
            #[repr(C)]
            pub struct References {
                #( #[doc = #gdocs] pub #gfields: #ty, )*
            }

            impl References {
                /// The filters at rest: each reference at its command in `at` (clamped into
                /// its proved range, a NaN at the range's midpoint), each rate zero.
                pub fn start(at: &Targets) -> References {
                    References { #( #starts )* }
                }

                /// The field names, in the order of [`References::from_array`].
                pub const NAMES: [&'static str; #ng] = [#(#gnames),*];

                /// The state from an array in the order of [`References::NAMES`].
                pub fn from_array(a: [#ty; #ng]) -> References {
                    References { #( #gfields: a[#gidx], )* }
                }

                /// The state as an array in the order of [`References::NAMES`].
                pub fn to_array(&self) -> [#ty; #ng] {
                    [#( self.#gfields, )*]
                }
            }

            /// What the reference filters follow: each filter's command.
            #[derive(Clone, Copy, Debug, PartialEq)]
            #[repr(C)]
            pub struct Targets {
                #( pub #cfields: #ty, )*
            }

            impl Targets {
                /// The field names, in the order of [`Targets::from_array`].
                pub const NAMES: [&'static str; #nc] = [#(#cnames),*];

                /// The targets from an array in the order of [`Targets::NAMES`].
                pub fn from_array(a: [#ty; #nc]) -> Targets {
                    Targets { #( #cfields: a[#cidx], )* }
                }
            }

            /// Advances every reference filter over `dt` seconds towards its command: the
            /// exact solution of `ṙ = clamp(k·(c − r), lo, hi)` for a constant command. A NaN
            /// command holds its reference; gains outside their proved set are replaced by the
            /// defaults; a `dt` that is not positive changes nothing. A reference that is not
            /// finite restarts at rest at its command (as [`References::start`]). Returns the
            /// `STATUS_*` bits of what it repaired: `GUIDANCE_REPAIRED`, `GAINS_REJECTED`.
            pub fn advance_references(state: &mut References, targets: &Targets, gains: &Gains, dt: #ty) -> u32 {
                let mut status: u32 = 0;
                if !(dt > 0.0) {
                    return status;
                }
                let g: Gains = if check_gains(gains) {
                    *gains
                } else {
                    status |= STATUS_GAINS_REJECTED;
                    Gains::DEFAULT
                };
                #blocks
                status
            }
        };
    }

    let unsuffixed = proc_macro2::Literal::usize_unsuffixed;
    // the controller states' struct, and what compute_commands takes and gives for them
    let (memory_items, memory_params, memory_field, memory_init, memory_out) = if n_mem == 0 {
        let none = TokenStream::new();
        (none.clone(), none.clone(), none.clone(), none.clone(), none)
    } else {
        let mfields: Vec<Ident> = c.memory.iter().map(|m| field(&m.name)).collect();
        let mdocs: Vec<String> = c
            .memory
            .iter()
            .map(|m| {
                format!(
                    "Controller state `{}` [{}], held within [{}, {}], starts at {}.",
                    m.name, m.unit, m.limits.0, m.limits.1, m.initial
                )
            })
            .collect();
        let minit: Vec<TokenStream> = c.memory.iter().map(|m| e.lit(m.initial)).collect();
        let mnames: Vec<&str> = c.memory.iter().map(|m| m.name.as_str()).collect();
        let nm = unsuffixed(n_mem);
        let midx: Vec<proc_macro2::Literal> = (0..n_mem).map(unsuffixed).collect();
        (
            quote! {
                /// The controller states the law carries from one period to the next. Start
                /// them with [`Memory::START`] (and again to reset them);
                /// [`compute_commands`] advances them.
                #[derive(Clone, Copy, Debug, PartialEq)]
                #[repr(C)]
                pub struct Memory {
                    #( #[doc = #mdocs] pub #mfields: #ty, )*
                }

                impl Memory {
                    /// Every controller state at its initial value.
                    pub const START: Memory = Memory { #( #mfields: #minit, )* };

                    /// The field names, in the order of [`Memory::from_array`].
                    pub const NAMES: [&'static str; #nm] = [#(#mnames),*];

                    /// The states from an array in the order of [`Memory::NAMES`].
                    pub fn from_array(a: [#ty; #nm]) -> Memory {
                        Memory { #( #mfields: a[#midx], )* }
                    }

                    /// The states as an array in the order of [`Memory::NAMES`].
                    pub fn to_array(&self) -> [#ty; #nm] {
                        [#( self.#mfields, )*]
                    }
                }

                #held_items
            },
            quote!(memory: &mut Memory, dt: #ty,),
            quote! {
                /// Controller states held at a limit: the `HELD_*` bits.
                pub memory_limits: u32,
            },
            quote!(let mut memory_limits: u32 = 0u32;),
            quote!(memory_limits,),
        )
    };
    let step_doc: &[&str] = if n_mem == 0 {
        &[
            " The control law once: the actuator commands from this period's reading, saturated",
            " to their limits.",
        ]
    } else {
        &[
            " The control law once: the actuator commands from this period's reading and the",
            " controller states, saturated to their limits; then each controller state advanced",
            " over `dt` seconds by forward Euler (`x + dt·x'`, its update law `x'` at this",
            " period's values) and held within its limits (a `HELD_*` bit when a limit acts). A",
            " state outside its limits is clamped into them first (a NaN restarts at its initial",
            " value), with `STATUS_MEMORY_REPAIRED`; a `dt` that is not positive advances nothing.",
        ]
    };
    let n_in = unsuffixed(inputs.len());
    let n_gain = unsuffixed(c.gains.len());
    let n_act = unsuffixed(c.actuators.len());
    let in_names: Vec<&str> = inputs.iter().map(String::as_str).collect();
    let gain_names: Vec<&str> = c.gains.iter().map(|g| g.name.as_str()).collect();
    let act_names: Vec<&str> = c.actuators.iter().map(|a| a.name.as_str()).collect();
    let in_idx: Vec<proc_macro2::Literal> = (0..inputs.len()).map(unsuffixed).collect();
    let gain_idx: Vec<proc_macro2::Literal> = (0..c.gains.len()).map(unsuffixed).collect();
    let zero_u = quote!(0u32);
    let file = quote! {
        /// What [`compute_commands`] reads each period: the measured states, the references
        /// and their rates, the signals.
        #[derive(Clone, Copy, Debug, PartialEq)]
        #[repr(C)]
        pub struct Reading {
            #( #[doc = #doc_input] pub #input_fields: #ty, )*
        }

        /// Run-time gains.
        #[derive(Clone, Copy, Debug, PartialEq)]
        #[repr(C)]
        pub struct Gains {
            #( #[doc = #doc_gain] pub #gain_fields: #ty, )*
        }

        impl Reading {
            /// The field names, in the order of [`Reading::from_array`].
            pub const NAMES: [&'static str; #n_in] = [#(#in_names),*];

            /// The reading from an array in the order of [`Reading::NAMES`].
            pub fn from_array(a: [#ty; #n_in]) -> Reading {
                Reading { #( #input_fields: a[#in_idx], )* }
            }
        }

        impl Gains {
            /// The defaults of the spec; [`compute_commands`] falls back to them when the given gains leave
            /// their proved ranges or constraints.
            pub const DEFAULT: Gains = Gains { #( #gain_fields: #gain_defaults, )* };

            /// The field names, in the order of [`Gains::from_array`].
            pub const NAMES: [&'static str; #n_gain] = [#(#gain_names),*];

            /// The gains from an array in the order of [`Gains::NAMES`].
            pub fn from_array(a: [#ty; #n_gain]) -> Gains {
                Gains { #( #gain_fields: a[#gain_idx], )* }
            }
        }

        impl Commands {
            /// The command names, in the order of [`Commands::commands`].
            pub const NAMES: [&'static str; #n_act] = [#(#act_names),*];

            /// The commands as an array.
            pub fn commands(&self) -> [#ty; #n_act] {
                [#( self.#act_fields, )*]
            }
        }

        impl Default for Gains {
            fn default() -> Gains {
                Gains::DEFAULT
            }
        }

        /// What [`compute_commands`] sends: each actuator's command and what happened.
        #[derive(Clone, Copy, Debug, PartialEq)]
        #[repr(C)]
        pub struct Commands {
            #( #[doc = #doc_act] pub #act_fields: #ty, )*
            /// Limits hit: the `LIMIT_*` bits.
            pub limits: u32,
            /// An input was NaN or outside the proved envelope, or the gains outside their
            /// proved set: the law was evaluated at the nearest point of the envelope (each
            /// state's error measured against its reference as given, then errors and
            /// references clamped to their ranges; a NaN input at its range's midpoint or at
            /// zero error), with the default gains; any bit of `status`.
            pub domain: bool,
            /// What was repaired: the `STATUS_*` bits.
            pub status: u32,
            #memory_field
        }

        #flag_items

        fn clamp_to(x: #ty, lo: #ty, hi: #ty) -> #ty {
            if x < lo {
                lo
            } else if x > hi {
                hi
            } else {
                x
            }
        }

        /// Do the gains lie in their proved ranges and meet the constraints?
        pub fn check_gains(g: &Gains) -> bool {
            #cbody
            #checks
        }

        #( #[doc = #step_doc] )*
        pub fn compute_commands(reading: &Reading, gains: &Gains, #memory_params) -> Commands {
            let mut status: u32 = #zero_u;
            #guards
            #memory_guards
            let g: Gains = if check_gains(gains) {
                *gains
            } else {
                status |= STATUS_GAINS_REJECTED;
                Gains::DEFAULT
            };
            #lbody
            let mut limits: u32 = #zero_u;
            #saturate
            #memory_init
            #advance
            Commands { #( #act_fields: #cmd_names, )* limits, domain: status != #zero_u, status, #memory_out }
        }

        #memory_items

        #guidance_items
    };
    let parsed: syn::File =
        syn::parse2(file).map_err(|err| format!("emitted Rust does not parse: {err}"))?;
    let body = prettyplease::unparse(&parsed);
    let mut out = String::new();
    for l in prov.lines("Rust (no_std-friendly: core and the `libm` crate)", float) {
        if l.is_empty() {
            out.push_str("//\n");
        } else {
            out.push_str(&format!("// {l}\n"));
        }
    }
    out.push_str(&format!(
        "//\n// Law `{}`: {} arithmetic operations per step.\n#![allow(clippy::all, unused_mut, unused_variables, unused_assignments, non_snake_case)]\n\n",
        c.name,
        c.op_count()
    ));
    out.push_str(&body);
    Ok(out)
}
