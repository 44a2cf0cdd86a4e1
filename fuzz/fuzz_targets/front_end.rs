//! Fuzz target: any bytes through the front end (parse, lower), the
//! canonical formatter and network analysis. A panic, an overflow trap, a
//! stack overflow or a hang here is a bug: bad input must end in
//! diagnostics.
#![no_main]

use libfuzzer_sys::fuzz_target;
use ratewright::model::load_str;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    // `use` may name any path; keep the fuzzer away from device files that
    // never end (the file-size limit is tested separately).
    if text.contains("/dev") || text.contains("/proc") || text.contains("/sys") {
        return;
    }
    let loaded = load_str(text, Path::new("fuzz_input.mech"));
    for d in &loaded.diagnostics {
        let _ = ratewright::diagnostics::render_human(d, &loaded.sources);
    }
    if let Ok(tree) = ratewright::syntax::parse(
        text.strip_prefix('\u{FEFF}').unwrap_or(text),
        ratewright::diagnostics::FileId(0),
    ) {
        let formatted = ratewright::syntax::format::format_file(&tree, text);
        let _ = ratewright::syntax::parse(&formatted, ratewright::diagnostics::FileId(0));
    }
    let Some(model) = loaded.model else { return };
    let y = model.initial_state();
    for e in model.rhs_exprs() {
        let _ = model.eval_at(&e, &y, 0.0);
    }
    let _ = ratewright::network::analyze(&model);
});
