//! R target: `rhs <- function(t, y, parms)` returning `list(dydt)` (the
//! convention of R's ODE solvers), `jacobian(t, y, parms)` returning the
//! dense matrix, named vectors `parms` and `y0`, `full_state(y, parms)`,
//! the protocol (timed events, triggers, the volume) and `simulate(times)`,
//! which runs it with deSolve's LSODA piece by piece between events, its
//! root finding locating the `when` conditions. Run with `Rscript` it writes
//! CSV with the columns of `ratewright run -o`, one row per asked time (the
//! rows of `run --times`; no extra rows at event times).

use super::names::{Names, R_RESERVED, quoted};
use super::system::{Needs, System};
use super::{EmitOptions, EmittedFile, Target, banner};
use crate::algebra::print::{Syntax, float_literal, plain_literal, print_expr};
use crate::diagnostics::Diagnostic;
use crate::model::{Action, EventKind, Expr, Sym, coef_f64};
use std::fmt::Write;

pub struct R;

impl Target for R {
    fn runs_protocol(&self) -> bool {
        true
    }
    fn runs_assay_protocol(&self) -> bool {
        true
    }
    fn name(&self) -> &'static str {
        "r"
    }
    fn extension(&self) -> &'static str {
        "R"
    }
    fn emit(&self, sys: &System, options: &EmitOptions) -> Result<Vec<EmittedFile>, Diagnostic> {
        Ok(vec![EmittedFile {
            name: format!("{}.R", options.stem),
            contents: source(sys, options),
        }])
    }
}

fn source(sys: &System, options: &EmitOptions) -> String {
    let m = &sys.model;
    let rising: Vec<String> = (1..=sys.triggers.len())
        .map(|k| format!("rising_{k}"))
        .collect();
    let mut reserved: Vec<&str> = R_RESERVED.to_vec();
    reserved.extend(rising.iter().map(String::as_str));
    reserved.extend([
        "rhs",
        "jacobian",
        "full_state",
        "parms",
        "events",
        "v",
        "x",
        "t",
        "observables",
        "triggers",
        "simulate",
        "apply_event",
        "state_from_full",
        "rising_values",
        "volume0",
        "fixed_names",
        "totals",
        "state_species",
        "columns",
        "main",
    ]);
    let names = Names::new(m, &reserved);
    let ex = |e: &Expr| print_expr(e, &|s| names.get(s), Syntax::R);
    let mut o = String::new();
    let _ = writeln!(o, "# {}", banner(sys, options, "r"));
    let _ = writeln!(
        o,
        "# Units: concentration {}, time {}.",
        m.units.concentration.symbol(),
        m.units.time.symbol()
    );
    o.push_str(
        "# rhs(t, y, parms) returns list(dydt); jacobian(t, y, parms) the dense Jacobian.\n\n",
    );
    let named = |pairs: Vec<(String, String)>| {
        pairs
            .into_iter()
            .map(|(k, v)| format!("{} = {v}", quoted(&k)))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let _ = writeln!(
        o,
        "# Params with a value, fixed species and totals (default units).\nparms <- c({})",
        named(
            sys.constants
                .iter()
                .map(|c| (m.name_of(c.sym).to_string(), float_literal(c.value)))
                .collect()
        )
    );
    let _ = writeln!(
        o,
        "y0 <- c({})",
        named(
            sys.state
                .iter()
                .zip(sys.initial_state())
                .map(|(&i, v)| (m.species[i].name.clone(), float_literal(v)))
                .collect()
        )
    );
    let _ = writeln!(
        o,
        "species_names <- c({})",
        m.species
            .iter()
            .map(|s| quoted(&s.name))
            .collect::<Vec<_>>()
            .join(", ")
    );
    let steps = sys.used_steps();
    let needs = sys.needs(steps.iter().map(|&j| &sys.rates[j]));
    o.push_str("\nrhs <- function(t, y, parms) {\n");
    prelude(&mut o, sys, &names, &needs);
    let _ = writeln!(o, "  v <- numeric({})", m.steps.len().max(1));
    for &j in &steps {
        let _ = writeln!(
            o,
            "  v[{}] <- {}  # {}",
            j + 1,
            ex(&sys.rates[j]),
            m.steps[j].name
        );
    }
    let _ = writeln!(o, "  dydt <- numeric({})", sys.n());
    for (r, terms) in sys.rhs_terms.iter().enumerate() {
        if !terms.is_empty() {
            let body = super::python::combination(terms, |j| format!("v[{}]", j + 1));
            let _ = writeln!(
                o,
                "  dydt[{}] <- {body}  # {}",
                r + 1,
                m.species[sys.state[r]].name
            );
        }
    }
    o.push_str("  list(dydt)\n}\n");

    let needs = sys.needs(sys.jac.iter().map(|e| &e.expr));
    o.push_str("\njacobian <- function(t, y, parms) {\n");
    prelude(&mut o, sys, &names, &needs);
    let _ = writeln!(o, "  J <- matrix(0, nrow = {n}, ncol = {n})", n = sys.n());
    for e in &sys.jac {
        let _ = writeln!(o, "  J[{}, {}] <- {}", e.row + 1, e.col + 1, ex(&e.expr));
    }
    o.push_str("  J\n}\n");

    o.push_str("\nfull_state <- function(y, parms) {\n");
    prelude(&mut o, sys, &names, &sys.full_state_needs());
    let all: Vec<String> = sys
        .full_state_terms(m, &|s| names.get(s))
        .into_iter()
        .zip(&m.species)
        .map(|(v, species)| format!("{} = {v}", quoted(&species.name)))
        .collect();
    let _ = writeln!(o, "  c({})\n}}", all.join(", "));
    protocol(&mut o, sys, &names);
    o.push_str(SIMULATE);
    o
}

/// The items of a multi-line `list(...)`, one a line; nothing when empty.
fn list_body(items: &[String]) -> String {
    if items.is_empty() {
        String::new()
    } else {
        format!("\n{}\n", items.join(",\n"))
    }
}

/// An R value for an event's action: a list naming its kind and operands.
fn action(m: &crate::model::Model, a: &Action) -> String {
    match a {
        Action::Species {
            kind,
            species,
            amount,
        } => format!(
            "kind = {}, species = {}, amount = {}",
            quoted(match kind {
                EventKind::Add => "add",
                EventKind::Remove => "remove",
                EventKind::Set => "set",
            }),
            quoted(&m.species[*species].name),
            float_literal(*amount)
        ),
        Action::Stock { volume, contents } => format!(
            "kind = \"stock\", volume = {}, contents = c({})",
            float_literal(*volume),
            contents
                .iter()
                .map(|(s, c)| format!("{} = {}", quoted(m.name_of(*s)), float_literal(*c)))
                .collect::<Vec<_>>()
                .join(", ")
        ),
        Action::Withdraw { volume } => {
            format!("kind = \"withdraw\", volume = {}", float_literal(*volume))
        }
    }
}

/// The protocol's data and the functions over the full species vector
/// (observables, each trigger's rising function) that `simulate` uses.
fn protocol(o: &mut String, sys: &System, names: &Names) {
    let m = &sys.model;
    let ex = |e: &Expr| print_expr(e, &|s| names.get(s), Syntax::R);
    for f in sys.functions_over_full() {
        let body = match &f.condition {
            Some(c) => {
                let _ = write!(o, "\n# `when {c}`: positive once the condition holds.");
                ex(f.exprs[0])
            }
            None => {
                o.push_str(
                    "\n# Every observable from the full species vector x (species_names order).",
                );
                let values: Vec<String> = f
                    .exprs
                    .iter()
                    .zip(&m.observables)
                    .map(|(e, ob)| format!("{} = {}", quoted(&ob.name), ex(e)))
                    .collect();
                format!("c({})", values.join(", "))
            }
        };
        let _ = writeln!(o, "\n{} <- function(t, x, parms) {{", f.name);
        for i in f.species(sys) {
            let _ = writeln!(o, "  {} <- x[[{}]]", names.get(Sym::Species(i)), i + 1);
        }
        prelude(o, sys, names, &f.needs(sys));
        let _ = writeln!(o, "  {body}\n}}");
    }
    o.push_str("\n# Timed events in the order they apply (by time, file order at one time).\n# add, remove, set: a species' concentration; stock: everything is diluted\n# by V/(V+dV), then the stock adds c*dV/(V+dV); withdraw: the volume falls,\n# concentrations stay.\nevents <- list(");
    let timed: Vec<String> = sys
        .timed_events()
        .into_iter()
        .map(|(t, e)| {
            format!(
                "  list(time = {}, {})",
                float_literal(t),
                action(m, &e.action)
            )
        })
        .collect();
    o.push_str(&list_body(&timed));
    o.push_str(")\n# Triggered events: each fires when its rising function crosses zero upwards\n# (never at t = 0 for a condition already true).\ntriggers <- list(");
    let when: Vec<String> = sys
        .when_events()
        .into_iter()
        .enumerate()
        .map(|(k, (e, _, _))| {
            format!(
                "  list(rising = rising_{}, {})",
                k + 1,
                action(m, &e.action)
            )
        })
        .collect();
    o.push_str(&list_body(&when));
    let strings = |v: Vec<String>| v.iter().map(|s| quoted(s)).collect::<Vec<_>>().join(", ");
    let _ = writeln!(
        o,
        ")\n# The starting volume ({}; NULL: not declared), the fixed species (a\n# dilution changes them too) and the species of each state slot.\nvolume0 <- {}\nfixed_names <- c({})\nstate_species <- c({})",
        m.volume_symbol(),
        m.volume.map(float_literal).unwrap_or_else(|| "NULL".into()),
        strings(m.fixed.iter().map(|f| f.name.clone()).collect()),
        strings(
            sys.state
                .iter()
                .map(|&i| m.species[i].name.clone())
                .collect()
        )
    );
    o.push_str("# Conserved totals (recomputed after each event): name = c(species = coefficient).\ntotals <- list(");
    let totals: Vec<String> = m
        .totals
        .iter()
        .map(|t| {
            format!(
                "{} = c({})",
                quoted(&t.name),
                t.terms
                    .iter()
                    .map(|(i, c)| format!(
                        "{} = {}",
                        quoted(&m.species[*i].name),
                        plain_literal(coef_f64(*c))
                    ))
                    .collect::<Vec<_>>()
                    .join(", ")
            )
        })
        .collect();
    o.push_str(&totals.join(", "));
    let _ = writeln!(
        o,
        ")\ncolumns <- c(\"t\", species_names, {}{})",
        if m.observables.is_empty() {
            "NULL".to_string()
        } else {
            format!(
                "c({})",
                strings(m.observables.iter().map(|ob| ob.name.clone()).collect())
            )
        },
        if m.volume.is_some() {
            ", \"volume\""
        } else {
            ""
        }
    );
}

fn prelude(o: &mut String, sys: &System, names: &Names, needs: &Needs) {
    for &r in &needs.state {
        let _ = writeln!(
            o,
            "  {} <- y[[{}]]",
            names.get(Sym::Species(sys.state[r])),
            r + 1
        );
    }
    for &k in &needs.constants {
        let sym = sys.constants[k].sym;
        let _ = writeln!(
            o,
            "  {} <- parms[[{}]]",
            names.get(sym),
            quoted(sys.model.name_of(sym))
        );
    }
    for &i in &needs.derived {
        if let Some(e) = sys.derived_expr(i) {
            let _ = writeln!(
                o,
                "  {} <- {}",
                names.get(Sym::Param(i)),
                print_expr(e, &|s| names.get(s), Syntax::R)
            );
        }
    }
    for &k in &needs.dependent {
        let d = &sys.dependent[k];
        let _ = writeln!(
            o,
            "  {} <- {}",
            names.get(Sym::Species(d.species)),
            print_expr(&d.formula, &|s| names.get(s), Syntax::R)
        );
    }
}

const SIMULATE: &str = r#"
# One event on the full species vector x, the parameters (fixed species are
# diluted too) and the volume at time t; returns all three.
apply_event <- function(ev, x, parms, volume, t) {
  if (ev$kind == "add") {
    x[[ev$species]] <- x[[ev$species]] + ev$amount
  } else if (ev$kind == "remove") {
    x[[ev$species]] <- max(x[[ev$species]] - ev$amount, 0)
  } else if (ev$kind == "set") {
    x[[ev$species]] <- ev$amount
  } else if (ev$kind == "stock") {
    after <- volume + ev$volume
    kept <- volume / after
    x <- x * kept
    for (name in fixed_names) parms[[name]] <- parms[[name]] * kept
    for (name in names(ev$contents)) {
      added <- ev$contents[[name]] * ev$volume / after
      if (name %in% names(x)) {
        x[[name]] <- x[[name]] + added
      } else {
        parms[[name]] <- parms[[name]] + added
      }
    }
    volume <- after
  } else if (ev$kind == "withdraw") {
    if (ev$volume >= volume * (1 - 1e-12)) {
      stop(sprintf("at t = %.17g, a withdrawal of %.17g is more than the volume %.17g left", t, ev$volume, volume))
    }
    volume <- volume - ev$volume
  }
  list(x = x, parms = parms, volume = volume)
}

# The state vector and parameters from a full species vector: totals are
# recomputed, since an event changes the amounts they conserve.
state_from_full <- function(x, parms) {
  for (total in names(totals)) {
    if (total %in% names(parms)) {
      terms <- totals[[total]]
      parms[[total]] <- sum(terms * x[names(terms)])
    }
  }
  list(y = x[state_species], parms = parms)
}

rising_values <- function(t, y, parms) {
  x <- full_state(y, parms)
  vapply(triggers, function(trigger) trigger$rising(t, x, parms), numeric(1))
}

# Integrates from t = 0 through the events and triggers with deSolve's LSODA
# and the analytic Jacobian, piece by piece between events; LSODA's root
# finding stops a piece where a rising function changes sign. Returns a
# matrix with one row per output time (columns: t, every species, every
# observable, the volume if declared); at an event's time a row shows the
# state after the event.
simulate <- function(times, p = NULL, rtol = 1e-8, atol = 1e-12) {
  if (is.null(p)) p <- parms
  times <- as.numeric(times)
  end <- if (length(times) > 0) max(times) else 0
  pending <- Filter(function(ev) ev$time <= end, events)
  volume <- volume0
  y <- y0
  out <- matrix(NA_real_, nrow = length(times), ncol = length(columns), dimnames = list(NULL, columns))
  next_out <- 1
  firings <- 0
  record <- function(t, y) {
    x <- full_state(y, p)
    out[next_out, ] <<- c(t, x, observables(t, x, p), volume)
    next_out <<- next_out + 1
  }
  fire <- function(evs, t) {
    x <- full_state(y, p)
    for (ev in evs) {
      r <- apply_event(ev, x, p, volume, t)
      x <- r$x
      p <<- r$parms
      volume <<- r$volume
    }
    s <- state_from_full(x, p)
    y <<- s$y
    p <<- s$parms
  }
  integrate <- function(grid, roots) {
    # Nothing to integrate (every species dependent or constant): the state
    # stands still, and the solver cannot take an empty vector.
    if (length(y) == 0) return(cbind(time = grid))
    sol <- deSolve::ode(y = y, times = grid, func = rhs, parms = p, method = "lsoda",
                        jacfunc = jacobian, jactype = "fullusr", rootfunc = roots,
                        rtol = rtol, atol = atol)
    if (attr(sol, "istate")[1] < 0) {
      stop(sprintf("integration failed after t = %.17g", grid[1]))
    }
    sol
  }
  state_at <- function(sol, i) {
    s <- sol[i, 1 + seq_along(y)]
    names(s) <- names(y)
    s
  }
  roots <- if (length(triggers) > 0) rising_values else NULL
  fire(Filter(function(ev) ev$time <= 0, pending), 0)
  pending <- Filter(function(ev) ev$time > 0, pending)
  # A condition already true at the start waits until it has been false.
  armed <- !(rising_values(0, y, p) > 0)
  t <- 0
  while (next_out <= length(times) && times[next_out] <= 0) record(times[next_out], y)
  boundaries <- sort(unique(c(vapply(pending, function(ev) ev$time, numeric(1)), end)))
  for (b in boundaries[boundaries > 0]) {
    while (t < b) {
      grid <- unique(c(t, times[times > t & times < b], b))
      sol <- integrate(grid, roots)
      troot <- attr(sol, "troot")
      rows <- nrow(sol) - if (is.null(troot)) 0 else 1
      for (i in seq_len(rows)[-1]) {
        while (next_out <= length(times) && times[next_out] == sol[i, 1] && sol[i, 1] < b) {
          record(sol[i, 1], state_at(sol, i))
        }
      }
      y <- state_at(sol, nrow(sol))
      if (is.null(troot)) {
        t <- b
        break
      }
      t <- troot
      hit <- which(attr(sol, "iroot") != 0)
      up <- hit[armed[hit]]
      # A condition that became false may fire again on its next rise.
      armed[setdiff(hit, up)] <- TRUE
      if (length(up) > 0) {
        firings <- firings + length(up)
        if (firings > 100000) stop("triggered events fired more than 100000 times; a condition may be flipping at every step")
        armed[up] <- FALSE
        fire(triggers[up], t)
      }
      # Step just past the root, so the same crossing is not found again.
      past <- min(b, t + 1e-9 * max(1, abs(t)))
      if (past > t) {
        step_grid <- unique(c(t, times[times > t & times < past], past))
        sol <- integrate(step_grid, NULL)
        for (i in seq_len(nrow(sol))[-1]) {
          while (next_out <= length(times) && times[next_out] == sol[i, 1] && sol[i, 1] < b) {
            record(sol[i, 1], state_at(sol, i))
          }
        }
        y <- state_at(sol, nrow(sol))
        t <- past
      }
      armed[!(rising_values(t, y, p) > 0)] <- TRUE
    }
    fire(Filter(function(ev) ev$time == b, pending), b)
    # An armed condition the events made true fires at once (file order).
    repeat {
      now <- which(armed & rising_values(b, y, p) > 0)
      if (length(now) == 0) break
      armed[now] <- FALSE
      fire(triggers[now], b)
    }
    armed[!(rising_values(b, y, p) > 0)] <- TRUE
    while (next_out <= length(times) && times[next_out] <= b) record(times[next_out], y)
  }
  out
}

# Rscript <file> --until T [--points N] | --times t1,t2,... [--rtol R] [--atol A]:
# CSV of simulate() on standard output.
main <- function(args) {
  value <- function(flag, default) {
    i <- match(flag, args)
    if (is.na(i)) default else args[[i + 1]]
  }
  times <- if (!is.null(value("--times", NULL))) {
    as.numeric(strsplit(value("--times", NULL), ",")[[1]])
  } else {
    until <- value("--until", NULL)
    if (is.null(until)) stop("give --until T or --times t1,t2,...")
    seq(0, as.numeric(until), length.out = as.integer(value("--points", "101")))
  }
  out <- simulate(times, parms, as.numeric(value("--rtol", "1e-8")), as.numeric(value("--atol", "1e-12")))
  cat(paste(columns, collapse = ","), "\n", sep = "")
  for (i in seq_len(nrow(out))) {
    cat(paste(sprintf("%.17g", out[i, ]), collapse = ","), "\n", sep = "")
  }
}

if (sys.nframe() == 0L) main(commandArgs(trailingOnly = TRUE))
"#;
