//! Octave target: one function file `<stem>.m`. Calling `m = <stem>()`
//! returns a struct with the parameters `p`, the initial state `y0`, the
//! names, the events, handles `rhs(t, y, p)`, `jac(t, y, p)` and
//! `full_state(y, p)`, and `options`: an `odeset` with the analytic
//! Jacobian set, ready for ode15s:
//! `[t, y] = ode15s(@(t, y) m.rhs(t, y, m.p), [0 T], m.y0, m.options);`
//! `m.simulate(m, times)` runs the whole protocol (timed events, stock
//! additions, withdrawals and the volume, `when` events) with ode15s piece
//! by piece, its `Events` option detecting the conditions.

use super::names::{Names, OCTAVE_RESERVED};
use super::system::{Needs, System};
use super::{EmitOptions, EmittedFile, Target, banner};
use crate::algebra::print::{Syntax, float_literal, plain_literal, print_expr};
use crate::diagnostics::Diagnostic;
use crate::model::{Action, EventKind, Expr, Sym};
use std::fmt::Write;

pub struct Octave;

impl Target for Octave {
    fn runs_protocol(&self) -> bool {
        true
    }
    fn runs_assay_protocol(&self) -> bool {
        true
    }
    fn name(&self) -> &'static str {
        "octave"
    }
    fn extension(&self) -> &'static str {
        "m"
    }
    fn emit(&self, sys: &System, options: &EmitOptions) -> Result<Vec<EmittedFile>, Diagnostic> {
        Ok(vec![EmittedFile {
            name: format!("{}.m", options.stem),
            contents: source(sys, options),
        }])
    }
}

/// A single-quoted Octave string.
fn sq(s: &str) -> String {
    format!("'{}'", s.replace('\'', "''").replace('\n', " "))
}

fn source(sys: &System, options: &EmitOptions) -> String {
    let m = &sys.model;
    let stem = &options.stem;
    let rising: Vec<String> = (1..=sys.triggers.len())
        .map(|k| format!("rising_{k}"))
        .collect();
    let mut reserved: Vec<&str> = OCTAVE_RESERVED.to_vec();
    reserved.push(stem);
    reserved.extend([
        "rhs",
        "jac",
        "full_state",
        "v",
        "x",
        "t",
        "observables",
        "simulate",
        "protocol_event",
        "apply_event",
        "state_from_full",
        "rising_values",
        "trigger_events",
        "integrate",
        "state_at",
        "crossing",
        "record",
        "fire",
    ]);
    reserved.extend(rising.iter().map(String::as_str));
    let names = Names::new(m, &reserved);
    let ex = |e: &Expr| print_expr(e, &|s| names.get(s), Syntax::Octave);
    let mut o = String::new();
    let _ = writeln!(o, "function model = {stem}()");
    let _ = writeln!(o, "  % {}", banner(sys, options, "octave"));
    let _ = writeln!(
        o,
        "  % Units: concentration {}, time {}.",
        m.units.concentration.symbol(),
        m.units.time.symbol()
    );
    let _ = writeln!(
        o,
        "  % Use: m = {stem}(); [t, y] = ode15s(@(t, y) m.rhs(t, y, m.p), [0 T], m.y0, m.options);"
    );
    o.push_str(
        "  % (after changing m.p, set m.options = odeset('Jacobian', @(t, y) m.jac(t, y, m.p)).)\n",
    );
    let cells = |v: Vec<String>| v.iter().map(|s| sq(s)).collect::<Vec<_>>().join(", ");
    let _ = writeln!(
        o,
        "  model.species_names = {{{}}};",
        cells(m.species.iter().map(|s| s.name.clone()).collect())
    );
    let _ = writeln!(
        o,
        "  model.state_names = {{{}}};",
        cells(
            sys.state
                .iter()
                .map(|&i| m.species[i].name.clone())
                .collect()
        )
    );
    o.push_str(
        "  % Params with a value, fixed species and totals (default units).\n  p = struct();\n",
    );
    for c in &sys.constants {
        let _ = writeln!(o, "  p.{} = {};", names.get(c.sym), float_literal(c.value));
    }
    o.push_str("  model.p = p;\n");
    let init: Vec<String> = sys
        .initial_state()
        .iter()
        .map(|v| float_literal(*v))
        .collect();
    let _ = writeln!(o, "  model.y0 = [{}];", init.join("; "));
    protocol_data(&mut o, sys, &names);
    o.push_str("  model.rhs = @rhs;\n  model.jac = @jac;\n  model.full_state = @full_state;\n  model.observables = @observables;\n  model.simulate = @simulate;\n");
    // Octave's automatic first step can fail the error test on a fast
    // initial transient; a step scaled by the fastest rate at the start works.
    // (Where the Jacobian is not finite at the start, e.g. sqrt(B) at B = 0,
    // Octave's own choice is left in place.)
    o.push_str("  h0 = 1e-4 / max(1, norm(jac(0, model.y0, p), Inf));\n");
    o.push_str(
        "  if isfinite(h0) && h0 > 0\n    model.options = odeset('Jacobian', @(t, y) jac(t, y, p), 'InitialStep', h0);\n  else\n    model.options = odeset('Jacobian', @(t, y) jac(t, y, p));\n  end\nend\n",
    );

    let steps = sys.used_steps();
    let needs = sys.needs(steps.iter().map(|&j| &sys.rates[j]));
    o.push_str("\nfunction dydt = rhs(t, y, p)\n");
    prelude(&mut o, sys, &names, &needs);
    let _ = writeln!(o, "  v = zeros({}, 1);", m.steps.len().max(1));
    for &j in &steps {
        let _ = writeln!(
            o,
            "  v({}) = {};  % {}",
            j + 1,
            ex(&sys.rates[j]),
            m.steps[j].name
        );
    }
    let _ = writeln!(o, "  dydt = zeros({}, 1);", sys.n());
    for (r, terms) in sys.rhs_terms.iter().enumerate() {
        if !terms.is_empty() {
            let body = super::python::combination(terms, |j| format!("v({})", j + 1));
            let _ = writeln!(
                o,
                "  dydt({}) = {body};  % {}",
                r + 1,
                m.species[sys.state[r]].name
            );
        }
    }
    o.push_str("end\n");

    let needs = sys.needs(sys.jac.iter().map(|e| &e.expr));
    o.push_str("\nfunction J = jac(t, y, p)\n");
    prelude(&mut o, sys, &names, &needs);
    let _ = writeln!(o, "  J = zeros({n}, {n});", n = sys.n());
    for e in &sys.jac {
        let _ = writeln!(o, "  J({}, {}) = {};", e.row + 1, e.col + 1, ex(&e.expr));
    }
    o.push_str("end\n");

    o.push_str("\nfunction x = full_state(y, p)\n");
    prelude(&mut o, sys, &names, &sys.full_state_needs());
    let all = sys.full_state_terms(m, &|s| names.get(s));
    let _ = writeln!(o, "  x = [{}];\nend", all.join("; "));
    protocol_functions(&mut o, sys, &names);
    o.push_str(SIMULATE);
    o
}

/// The protocol as data of the model struct: timed events (in the order
/// they apply), triggered events, the volume, the fixed species, the
/// state's species and the totals an event recomputes.
fn protocol_data(o: &mut String, sys: &System, names: &Names) {
    let m = &sys.model;
    let action = |a: &Action| -> String {
        match a {
            Action::Species {
                kind,
                species,
                amount,
            } => format!(
                "{}, {}, {}, 0, [], [], {{}}, []",
                sq(match kind {
                    EventKind::Add => "add",
                    EventKind::Remove => "remove",
                    EventKind::Set => "set",
                }),
                species + 1,
                float_literal(*amount)
            ),
            Action::Stock { volume, contents } => {
                let mut species = Vec::new();
                let mut species_c = Vec::new();
                let mut fixed = Vec::new();
                let mut fixed_c = Vec::new();
                for (sym, c) in contents {
                    match sym {
                        Sym::Species(i) => {
                            species.push((i + 1).to_string());
                            species_c.push(float_literal(*c));
                        }
                        Sym::Fixed(_) | Sym::Param(_) | Sym::Total(_) | Sym::Observable(_) => {
                            fixed.push(sq(&names.get(*sym)));
                            fixed_c.push(float_literal(*c));
                        }
                    }
                }
                format!(
                    "'stock', 0, 0, {}, [{}], [{}], {{{}}}, [{}]",
                    float_literal(*volume),
                    species.join(" "),
                    species_c.join(" "),
                    fixed.join(", "),
                    fixed_c.join(" ")
                )
            }
            Action::Withdraw { volume } => {
                format!(
                    "'withdraw', 0, 0, {}, [], [], {{}}, []",
                    float_literal(*volume)
                )
            }
        }
    };
    o.push_str("  % Timed events in the order they apply (by time, file order at one time):\n  % add, remove, set change a species (index); stock dilutes everything by\n  % V/(V+dV), then adds c*dV/(V+dV) of each stock species and fixed species;\n  % withdraw lowers the volume, concentrations unchanged.\n  model.events = {");
    let timed: Vec<String> = sys
        .timed_events()
        .into_iter()
        .map(|(t, e)| {
            format!(
                "protocol_event({}, {})",
                float_literal(t),
                action(&e.action)
            )
        })
        .collect();
    o.push_str(&timed.join(", ...\n    "));
    o.push_str("};\n  % Triggered events: model.rising{k}(t, x, p) rises through zero when the\n  % condition becomes true (never fires at t = 0 for one already true).\n  model.triggers = {");
    let when: Vec<String> = sys
        .when_events()
        .into_iter()
        .map(|(e, _, _)| format!("protocol_event(NaN, {})", action(&e.action)))
        .collect();
    o.push_str(&when.join(", ...\n    "));
    let _ = writeln!(
        o,
        "}};\n  model.rising = {{{}}};",
        (1..=sys.triggers.len())
            .map(|k| format!("@rising_{k}"))
            .collect::<Vec<_>>()
            .join(", ")
    );
    let _ = writeln!(
        o,
        "  % The starting volume ({}; [] when not declared), the fixed species' fields\n  % of p, and the species index of each state slot.\n  model.volume = [{}];\n  model.fixed_names = {{{}}};\n  model.state_species = [{}];",
        m.volume_symbol(),
        m.volume.map(float_literal).unwrap_or_default(),
        m.fixed
            .iter()
            .enumerate()
            .map(|(i, _)| sq(&names.get(Sym::Fixed(i))))
            .collect::<Vec<_>>()
            .join(", "),
        super::one_based(&sys.state, " ")
    );
    o.push_str("  % Totals in p, recomputed after each event: {field, species indices, coefficients}.\n  model.totals = {");
    let totals: Vec<String> = sys
        .totals_after_events()
        .into_iter()
        .map(|(i, species, coefficients)| {
            format!(
                "{{{}, [{}], [{}]}}",
                sq(&names.get(Sym::Total(i))),
                super::one_based(&species, " "),
                coefficients
                    .iter()
                    .map(|c| plain_literal(*c))
                    .collect::<Vec<_>>()
                    .join(" ")
            )
        })
        .collect();
    o.push_str(&totals.join(", "));
    let _ = writeln!(
        o,
        "}};\n  model.observable_names = {{{}}};",
        m.observables
            .iter()
            .map(|ob| sq(&ob.name))
            .collect::<Vec<_>>()
            .join(", ")
    );
}

/// Functions over the full species vector x: the observables and each
/// trigger's rising function.
fn protocol_functions(o: &mut String, sys: &System, names: &Names) {
    let ex = |e: &Expr| print_expr(e, &|s| names.get(s), Syntax::Octave);
    for f in sys.functions_over_full() {
        let body = match &f.condition {
            Some(c) => {
                let _ = write!(o, "\n% `when {c}`: positive once the condition holds.");
                ex(f.exprs[0])
            }
            None => {
                let values: Vec<String> = f.exprs.iter().map(|e| ex(e)).collect();
                format!("[{}]", values.join("; "))
            }
        };
        let _ = writeln!(o, "\nfunction z = {}(t, x, p)", f.name);
        for i in f.species(sys) {
            let _ = writeln!(o, "  {} = x({});", names.get(Sym::Species(i)), i + 1);
        }
        prelude(o, sys, names, &f.needs(sys));
        let _ = writeln!(o, "  z = {body};\nend");
    }
}

fn prelude(o: &mut String, sys: &System, names: &Names, needs: &Needs) {
    for &r in &needs.state {
        let _ = writeln!(
            o,
            "  {} = y({});",
            names.get(Sym::Species(sys.state[r])),
            r + 1
        );
    }
    for &k in &needs.constants {
        let _ = writeln!(o, "  {0} = p.{0};", names.get(sys.constants[k].sym));
    }
    for &i in &needs.derived {
        if let Some(e) = sys.derived_expr(i) {
            let _ = writeln!(
                o,
                "  {} = {};",
                names.get(Sym::Param(i)),
                print_expr(e, &|s| names.get(s), Syntax::Octave)
            );
        }
    }
    for &k in &needs.dependent {
        let d = &sys.dependent[k];
        let _ = writeln!(
            o,
            "  {} = {};",
            names.get(Sym::Species(d.species)),
            print_expr(&d.formula, &|s| names.get(s), Syntax::Octave)
        );
    }
}

const SIMULATE: &str = r#"
function e = protocol_event(time, kind, species, amount, volume, stock_species, stock_species_c, stock_fixed, stock_fixed_c)
  e.time = time;
  e.kind = kind;
  e.species = species;
  e.amount = amount;
  e.volume = volume;
  e.stock_species = stock_species;
  e.stock_species_c = stock_species_c;
  e.stock_fixed = stock_fixed;
  e.stock_fixed_c = stock_fixed_c;
end

% One event on the full species vector x, the parameters p (fixed species
% are diluted too) and the volume at time t.
function [x, p, volume] = apply_event(m, e, x, p, volume, t)
  switch e.kind
    case 'add'
      x(e.species) = x(e.species) + e.amount;
    case 'remove'
      x(e.species) = max(x(e.species) - e.amount, 0);
    case 'set'
      x(e.species) = e.amount;
    case 'stock'
      after = volume + e.volume;
      kept = volume / after;
      x = x * kept;
      for k = 1:numel(m.fixed_names)
        p.(m.fixed_names{k}) = p.(m.fixed_names{k}) * kept;
      end
      x(e.stock_species) = x(e.stock_species) + e.stock_species_c(:) * e.volume / after;
      for k = 1:numel(e.stock_fixed)
        p.(e.stock_fixed{k}) = p.(e.stock_fixed{k}) + e.stock_fixed_c(k) * e.volume / after;
      end
      volume = after;
    case 'withdraw'
      if e.volume >= volume * (1 - 1e-12)
        error('at t = %.17g, a withdrawal of %.17g is more than the volume %.17g left', t, e.volume, volume);
      end
      volume = volume - e.volume;
  end
end

% The state and parameters from a full species vector: the totals are
% recomputed, since an event changes the amounts they conserve.
function [y, p] = state_from_full(m, x, p)
  for k = 1:numel(m.totals)
    total = m.totals{k};
    p.(total{1}) = sum(total{3}(:) .* x(total{2}));
  end
  y = x(m.state_species);
end

function g = rising_values(m, t, y, p)
  x = full_state(y, p);
  g = zeros(numel(m.rising), 1);
  for k = 1:numel(m.rising)
    g(k) = m.rising{k}(t, x, p);
  end
end

% Armed conditions are watched rising, the others falling (to re-arm them).
function [value, isterminal, direction] = trigger_events(m, t, y, p, armed)
  value = rising_values(m, t, y, p);
  isterminal = ones(numel(value), 1);
  direction = 2 * double(armed(:)) - 1;
end

% ode15s from (t0, y0) over grid, with the analytic Jacobian and the slope
% at the start given: Octave's default initial slope of zero is inconsistent
% with the equations and makes IDA's first error test fail at tight
% tolerances.
function [tt, yy, te, ye, ie] = integrate(m, grid, y0, p, rtol, atol, armed)
  opts = odeset('RelTol', rtol, 'AbsTol', atol, 'Jacobian', @(t, y) jac(t, y, p), ...
                'InitialSlope', rhs(grid(1), y0, p));
  if nargin > 6
    opts = odeset(opts, 'Events', @(t, y) trigger_events(m, t, y, p, armed));
  end
  te = []; ye = []; ie = [];
  if isempty(y0)
    % Nothing to integrate: the state stands still (ode15s needs a vector).
    tt = grid(:); yy = zeros(numel(grid), 0);
  elseif nargout > 2
    [tt, yy, te, ye, ie] = ode15s(@(t, y) rhs(t, y, p), grid, y0, opts);
  else
    [tt, yy] = ode15s(@(t, y) rhs(t, y, p), grid, y0, opts);
  end
end

function y = state_at(m, t0, y0, t, p, rtol, atol)
  if t <= t0
    y = y0;
  else
    [~, yy] = integrate(m, [t0 t], y0, p, rtol, atol);
    y = yy(end, :)';
  end
end

% Where trigger k's rising function crosses zero upwards between the solver
% steps (t_lo, y_lo), where it is not positive, and t_hi, where it is:
% Illinois iterations, each state integrated from t_lo, to a relative 1e-12
% of the time (Octave's own event time interpolates linearly between steps).
function t_hi = crossing(m, k, t_lo, y_lo, t_hi, p, rtol, atol)
  t0 = t_lo;
  value = @(t) m.rising{k}(t, full_state(state_at(m, t0, y_lo, t, p, rtol, atol), p), p);
  g_lo = value(t_lo);
  g_hi = value(t_hi);
  side = 0;
  for it = 1:200
    if t_hi - t_lo <= 1e-12 * max(1, abs(t_hi))
      break;
    end
    t = t_hi - g_hi * (t_hi - t_lo) / (g_hi - g_lo);
    if !(t > t_lo && t < t_hi)
      t = 0.5 * (t_lo + t_hi);
    end
    g = value(t);
    if g > 0
      t_hi = t; g_hi = g;
      if side == 1, g_lo = g_lo / 2; end
      side = 1;
    else
      t_lo = t; g_lo = g;
      if side == -1, g_hi = g_hi / 2; end
      side = -1;
    end
  end
end

% Integrates from t = 0 through the events and triggers with ode15s, piece by
% piece between events. Returns one row per output time: t, every species,
% every observable, the volume if declared; at an event's time a row shows
% the state after it. Call as r = m.simulate(m, times) (or with rtol, atol).
function out = simulate(m, times, rtol, atol)
  if nargin < 3, rtol = 1e-8; end
  if nargin < 4, atol = 1e-10; end
  times = times(:)';
  p = m.p;
  volume = m.volume;
  y = m.y0;
  stop_at = max([times 0]);
  pending = {};
  for k = 1:numel(m.events)
    if m.events{k}.time <= stop_at
      pending{end + 1} = m.events{k};
    end
  end
  width = 1 + numel(m.species_names) + numel(m.observable_names) + numel(m.volume);
  out = nan(numel(times), width);
  next = 1;
  firings = 0;
  nudge = @(t, b) min(b, t + 1e-9 * max(1, abs(t)));
  [y, p, volume] = fire(m, pending(cellfun(@(e) e.time <= 0, pending)), y, p, volume, 0);
  pending = pending(cellfun(@(e) e.time > 0, pending));
  % A condition already true at the start waits until it has been false.
  armed = !(rising_values(m, 0, y, p) > 0);
  t = 0;
  while next <= numel(times) && times(next) <= 0
    [out, next] = record(m, out, next, times(next), y, p, volume);
  end
  boundaries = unique([cellfun(@(e) e.time, pending), stop_at]);
  for b = boundaries(boundaries > 0)
    while t < b
      inside = times(times > t & times < b);
      stop = b;
      up = [];
      if !isempty(m.rising)
        [tt, yy, te, ~, ie] = integrate(m, [t b], y, p, rtol, atol, armed);
        % Octave may not report a crossing in the step that ends the piece,
        % so the sign of each armed function at the solver's steps decides.
        g = zeros(numel(tt), numel(m.rising));
        for i = 1:numel(tt)
          g(i, :) = rising_values(m, tt(i), yy(i, :)', p)';
        end
        candidates = find(armed(:)' & (any(g > 0, 1) | ismember(1:numel(m.rising), ie)));
        found = inf(size(candidates));
        for c = 1:numel(candidates)
          k = candidates(c);
          j = find(g(:, k) > 0, 1);
          if isempty(j)
            % Octave stopped at its interpolated event time: search past it.
            lo = find(tt < te(end), 1, 'last');
            hi = te(end);
            while m.rising{k}(hi, full_state(state_at(m, tt(lo), yy(lo, :)', hi, p, rtol, atol), p), p) <= 0 && hi < b
              hi = min(b, hi + (hi - tt(lo)));
            end
          else
            lo = j - 1;
            hi = tt(j);
          end
          found(c) = crossing(m, k, tt(lo), yy(lo, :)', hi, p, rtol, atol);
        end
        falling = find(!armed(:)' & (any(g <= 0, 1) | ismember(1:numel(m.rising), ie)));
        if !isempty(candidates)
          stop = min(found);
          up = candidates(found == stop);
        elseif !isempty(falling)
          % Only falling conditions: they may fire again on their next rise.
          below = [tt(any(g(:, falling) <= 0, 2)); te(:)];
          stop = min(below(below > t));
          armed(falling) = true;
        end
      end
      inside = inside(inside < stop);
      [tt, yy] = integrate(m, [t inside stop], y, p, rtol, atol);
      if numel(inside) == 0
        tt = tt([1 end]); yy = yy([1 end], :);
      end
      for i = 2:numel(tt) - 1
        [out, next] = record(m, out, next, inside(i - 1), yy(i, :)', p, volume);
      end
      y = yy(end, :)';
      t = stop;
      if stop == b && isempty(up)
        break;
      end
      if !isempty(up)
        firings = firings + numel(up);
        if firings > 100000
          error('triggered events fired more than 100000 times; a condition may be flipping at every step');
        end
        armed(up) = false;
        [y, p, volume] = fire(m, m.triggers(up), y, p, volume, t);
      end
      % Step just past the root (an Euler step of 1e-9 of the time), so the
      % same crossing is not found again.
      past = nudge(t, b);
      y = y + (past - t) * rhs(t, y, p);
      t = past;
      armed(!(rising_values(m, t, y, p) > 0)) = true;
    end
    [y, p, volume] = fire(m, pending(cellfun(@(e) e.time == b, pending)), y, p, volume, b);
    % An armed condition the events made true fires at once (file order).
    now = find(armed(:)' & rising_values(m, b, y, p)' > 0);
    while !isempty(now)
      armed(now) = false;
      [y, p, volume] = fire(m, m.triggers(now), y, p, volume, b);
      now = find(armed(:)' & rising_values(m, b, y, p)' > 0);
    end
    armed(!(rising_values(m, b, y, p) > 0)) = true;
    while next <= numel(times) && times(next) <= b
      [out, next] = record(m, out, next, times(next), y, p, volume);
    end
  end
end

function [y, p, volume] = fire(m, events, y, p, volume, t)
  if isempty(events)
    return;
  end
  x = full_state(y, p);
  for k = 1:numel(events)
    [x, p, volume] = apply_event(m, events{k}, x, p, volume, t);
  end
  [y, p] = state_from_full(m, x, p);
end

function [out, next] = record(m, out, next, t, y, p, volume)
  x = full_state(y, p);
  out(next, :) = [t, x(:)', observables(t, x, p)(:)', volume];
  next = next + 1;
end
"#;
