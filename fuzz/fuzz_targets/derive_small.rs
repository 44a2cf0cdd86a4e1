//! Fuzz target: rate-law derivation on small mechanisms. Bytes either are a
//! mechanism's text (first byte even) or steer a generator of enzyme
//! mechanisms (2–6 forms, up to 8 steps binding substrates, releasing
//! products, some reversible, some at rapid equilibrium), which reaches the
//! derivation far more often than random text. Every mechanism goes through
//! the front end as a user's file would. A panic, an overflow trap or a hang
//! is a bug; a refusal must be a diagnostic.
#![no_main]

use libfuzzer_sys::fuzz_target;
use ratewright::model::load_str;
use ratewright::ratelaw::{Request, Target, derive};
use std::fmt::Write;
use std::path::Path;

const LIGANDS: [&str; 4] = ["A", "B", "I", "X"];
const PRODUCTS: [&str; 3] = ["P", "Q", "R"];

fn generated(data: &[u8]) -> String {
    let mut bytes = data.iter().copied();
    let mut next = move || bytes.next().unwrap_or(0);
    let forms = 2 + (next() % 5) as usize;
    let mut text = String::from("units concentration uM, time s\n");
    for f in 0..forms {
        let init = if f == 0 { " = 0.01" } else { "" };
        writeln!(text, "species E{f}{init}").ok();
    }
    for l in LIGANDS {
        writeln!(text, "species {l} = {}", 1 + next() % 50).ok();
    }
    for p in PRODUCTS {
        writeln!(text, "species {p}").ok();
    }
    let steps = 1 + (next() % 8) as usize;
    let mut equilibrium = Vec::new();
    for s in 0..steps {
        let (from, to, flags) = (next() as usize % forms, next() as usize % forms, next());
        let to = if to == from { (to + 1) % forms } else { to };
        let mut lhs = format!("E{from}");
        if flags & 1 != 0 {
            let l = LIGANDS[(flags as usize >> 4) % LIGANDS.len()];
            let coefficient = if flags & 0x40 != 0 { "2 " } else { "" };
            write!(lhs, " + {coefficient}{l}").ok();
        }
        let mut rhs = format!("E{to}");
        if flags & 2 != 0 {
            write!(
                rhs,
                " + {}",
                PRODUCTS[(flags as usize >> 2) % PRODUCTS.len()]
            )
            .ok();
        }
        let reversible = flags & 4 != 0;
        let (arrow, constants) = if reversible {
            ("<=>", format!("kf{s}, kr{s}"))
        } else {
            ("->", format!("kf{s}"))
        };
        writeln!(text, "param kf{s} = {}", 1 + next() % 100).ok();
        if reversible {
            writeln!(text, "param kr{s} = {}", 1 + next() % 100).ok();
            if flags & 8 != 0 && flags & 0x80 != 0 {
                equilibrium.push(format!("s{s}"));
            }
        }
        writeln!(text, "step s{s} {lhs} {arrow} {rhs} with {constants}").ok();
    }
    let forms_list: Vec<String> = (0..forms).map(|f| format!("E{f}")).collect();
    writeln!(text, "assume steady {}", forms_list.join(", ")).ok();
    if !equilibrium.is_empty() {
        writeln!(text, "assume equilibrium {}", equilibrium.join(", ")).ok();
    }
    if next() & 1 != 0 {
        writeln!(text, "total E_t = {}", forms_list.join(" + ")).ok();
    }
    text
}

fuzz_target!(|data: &[u8]| {
    if data.is_empty() || data.len() > 600 {
        return;
    }
    let text = if data[0] % 2 == 0 {
        match std::str::from_utf8(&data[1..]) {
            Ok(t) if !t.contains("/dev") && !t.contains("/proc") && !t.contains("/sys") => {
                t.to_string()
            }
            _ => return,
        }
    } else {
        generated(&data[1..])
    };
    let loaded = load_str(&text, Path::new("fuzz_input.mech"));
    let Some(model) = loaded.model else { return };
    let target = match data.last().copied().unwrap_or(0) % 4 {
        0 => Target::Species("P".into()),
        1 => Target::Flux("s0".into()),
        _ => Target::Overall,
    };
    let request = Request {
        target,
        max_terms: 20_000,
        ..Request::default()
    };
    if let Ok(derivation) = derive(&model, &request) {
        let _ = derivation.eval(&|_| 1.5);
    }
});
