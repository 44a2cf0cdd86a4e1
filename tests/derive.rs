//! `ratewright derive` end to end, checked against outside references:
//! published rate equations and kinetic constants (compared symbolically,
//! as exact rational functions), the numerical steady state that `steady`
//! finds for the full mechanism, and SymPy's solution of the same linear
//! steady-state system.

mod common;

use common::{models, python, ratewright, root};
use ratewright::algebra::poly::Vars;
use ratewright::algebra::rational::RationalFunction;
use ratewright::model::{Model, ParamDef, Rate, Sym, load_path};
use serde_json::Value;
use std::path::{Path, PathBuf};

// ---------------------------------------------------------------------------
// Published mechanisms (invented parameter values; the formulas are the
// published ones).

const BRIGGS_HALDANE: &str = r#"
mechanism briggs_haldane "one substrate, irreversible product release"
species S = 10 uM
species P
species E = 0.01 uM
species ES
param k1 = 1 /uM/s
param km1 = 5 /s
param k2 = 2 /s
step bind E + S <=> ES with k1, km1
step cat  ES -> E + P  with k2
total Et = E + ES
assume steady E, ES
"#;

const REVERSIBLE: &str = r#"
mechanism reversible_one_substrate
species S = 10 uM
species P = 1 uM
species E = 0.01 uM
species ES
param k1 = 1 /uM/s
param km1 = 5 /s
param k2 = 2 /s
param km2 = 0.5 /uM/s
step bind    E + S <=> ES with k1, km1
step release ES <=> E + P with k2, km2
total Et = E + ES
assume steady E, ES
"#;

fn inhibited(extra_species: &str, extra_steps: &str, forms: &str) -> String {
    format!(
        r#"
mechanism inhibited
species S = 10 uM
species P
species I = 3 uM
species E = 0.01 uM
species ES
{extra_species}
param k1 = 1 /uM/s
param km1 = 5 /s
param k2 = 2 /s
param ki = 2 /uM/s
param kmi = 4 /s
param kiu = 0.5 /uM/s
param kmiu = 3 /s
step bind E + S <=> ES with k1, km1
step cat  ES -> E + P  with k2
{extra_steps}
total Et = E + ES + {forms}
assume steady E, ES, {forms}
"#
    )
}

const SUBSTRATE_INHIBITION: &str = r#"
mechanism substrate_inhibition
species S = 10 uM
species P
species E = 0.01 uM
species ES
species SES
param k1 = 1 /uM/s
param km1 = 5 /s
param k2 = 2 /s
param k3 = 0.1 /uM/s
param km3 = 7 /s
step bind   E + S <=> ES with k1, km1
step cat    ES -> E + P  with k2
step second ES + S <=> SES with k3, km3
total Et = E + ES + SES
assume steady E, ES, SES
"#;

const ORDERED_BI_BI: &str = r#"
mechanism ordered_bi_bi
species A = 1 uM
species B = 1 uM
species P = 0.1 uM
species Q = 0.1 uM
species E = 0.01 uM
species EA
species EAB
species EQ
param k1 = 1 /uM/s
param k2 = 2 /s
param k3 = 3 /uM/s
param k4 = 4 /s
param k5 = 5 /s
param k6 = 6 /uM/s
param k7 = 7 /s
param k8 = 8 /uM/s
step s1 E + A <=> EA with k1, k2
step s2 EA + B <=> EAB with k3, k4
step s3 EAB <=> EQ + P with k5, k6
step s4 EQ <=> E + Q with k7, k8
total Et = E + EA + EAB + EQ
assume steady E, EA, EAB, EQ
"#;

const PING_PONG: &str = r#"
mechanism ping_pong_bi_bi
species A = 1 uM
species B = 1 uM
species P = 0.1 uM
species Q = 0.1 uM
species E = 0.01 uM
species EA
species F
species FB
param k1 = 1 /uM/s
param k2 = 2 /s
param k3 = 3 /s
param k4 = 4 /uM/s
param k5 = 5 /uM/s
param k6 = 6 /s
param k7 = 7 /s
param k8 = 8 /uM/s
step s1 E + A <=> EA with k1, k2
step s2 EA <=> F + P with k3, k4
step s3 F + B <=> FB with k5, k6
step s4 FB <=> E + Q with k7, k8
total Et = E + EA + F + FB
assume steady E, EA, F, FB
"#;

const ORDERED_TER_TER: &str = r#"
mechanism ordered_ter_ter
species A = 2 uM
species B = 3 uM
species C = 1.5 uM
species P = 0.1 uM
species Q = 0.2 uM
species R = 0.3 uM
species E = 0.01 uM
species EA
species EAB
species EABC
species EQR
species ER
param k1 = 1.5 /uM/s
param km1 = 2 /s
param k2 = 2.5 /uM/s
param km2 = 3 /s
param k3 = 0.7 /uM/s
param km3 = 4 /s
param k4 = 5 /s
param km4 = 0.6 /uM/s
param k5 = 6 /s
param km5 = 0.8 /uM/s
param k6 = 7 /s
param km6 = 0.9 /uM/s
step s1 E + A <=> EA with k1, km1
step s2 EA + B <=> EAB with k2, km2
step s3 EAB + C <=> EABC with k3, km3
step s4 EABC <=> EQR + P with k4, km4
step s5 EQR <=> ER + Q with k5, km5
step s6 ER <=> E + R with k6, km6
total Et = E + EA + EAB + EABC + EQR + ER
assume steady E, EA, EAB, EABC, EQR, ER
"#;

const THEORELL_CHANCE: &str = r#"
mechanism theorell_chance
species A = 1 uM
species B = 1 uM
species P = 0.1 uM
species Q = 0.1 uM
species E = 0.01 uM
species EA
species EQ
param k1 = 1 /uM/s
param k2 = 2 /s
param k3 = 3 /uM/s
param k4 = 4 /uM/s
param k5 = 5 /s
param k6 = 6 /uM/s
step s1 E + A <=> EA with k1, k2
step s2 EA + B <=> EQ + P with k3, k4
step s3 EQ <=> E + Q with k5, k6
total Et = E + EA + EQ
assume steady E, EA, EQ
"#;

const RAPID_EQUILIBRIUM_RANDOM_BI_BI: &str = r#"
mechanism rapid_equilibrium_random_bi_bi
species A = 1 uM
species B = 1 uM
species P
species Q
species E = 0.01 uM
species EA
species EB
species EAB
param k1 = 1 /uM/s
param km1 = 2 /s
param k2 = 3 /uM/s
param km2 = 4 /s
param k3 = 5 /uM/s
param km3 = 6 /s
param k4 = 7 /uM/s
param km4 = 8 /s
param kcat = 9 /s
step a_first  E + A <=> EA with k1, km1
step b_first  E + B <=> EB with k2, km2
step b_second EA + B <=> EAB with k3, km3
step a_second EB + A <=> EAB with k4, km4
step cat      EAB -> E + P + Q with kcat
total Et = E + EA + EB + EAB
assume steady E, EA, EB, EAB
assume equilibrium a_first, b_first, b_second, a_second
"#;

// ---------------------------------------------------------------------------
// Helpers.

struct Written {
    _dir: tempfile::TempDir,
    path: PathBuf,
}

fn write(name: &str, text: &str) -> Written {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join(format!("{name}.mech"));
    std::fs::write(&path, text).expect("write model");
    Written { _dir: dir, path }
}

fn derive_json(path: &Path, extra: &[&str]) -> Value {
    let p = path.to_string_lossy().to_string();
    let mut args = vec!["derive", p.as_str(), "--format", "json"];
    args.extend_from_slice(extra);
    let out = ratewright(&args);
    assert!(
        out.status.success(),
        "derive failed on {}:\n{}\n{}",
        path.display(),
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("derive prints JSON")
}

fn rational(text: &str, vars: &mut Vars) -> RationalFunction {
    RationalFunction::parse(text, vars).unwrap_or_else(|e| panic!("cannot parse `{text}`: {e}"))
}

/// Asserts that two expressions are the same rational function.
fn assert_same(what: &str, derived: &str, published: &str) {
    let mut vars = Vars::new();
    let a = rational(derived, &mut vars);
    let b = rational(published, &mut vars);
    assert!(
        a.equals(&b),
        "{what}: derived `{derived}` differs from the published `{published}`"
    );
}

fn constant<'a>(json: &'a Value, name: &str) -> &'a str {
    json["constants"][name]
        .as_str()
        .unwrap_or_else(|| panic!("no constant `{name}` in {}", json["constants"]))
}

fn numerator_denominator(json: &Value) -> String {
    format!(
        "({})/({})",
        json["numerator"].as_str().unwrap(),
        json["denominator"].as_str().unwrap()
    )
}

// ---------------------------------------------------------------------------
// Published forms, compared symbolically.

#[test]
fn briggs_haldane_1925() {
    let m = write("bh", BRIGGS_HALDANE);
    let j = derive_json(&m.path, &[]);
    // Briggs & Haldane (1925): v = V S / (Km + S), V = k2 E_t, Km = (k-1 + k2)/k1.
    assert_same(
        "rate",
        j["rate"].as_str().unwrap(),
        "k2*Et*S/((km1 + k2)/k1 + S)",
    );
    assert_same(
        "numerator/denominator",
        &numerator_denominator(&j),
        "k2*Et*S/((km1 + k2)/k1 + S)",
    );
    assert_same("kcat", constant(&j, "kcat"), "k2");
    assert_same("Km", constant(&j, "Km_S"), "(km1 + k2)/k1");
    assert_eq!(j["rate_of"]["reaction"], "S -> P");
}

#[test]
fn reversible_michaelis_menten_and_haldane_1930() {
    let m = write("rev", REVERSIBLE);
    let j = derive_json(&m.path, &[]);
    // Haldane (1930): v = (Vf S/KS - Vr P/KP) / (1 + S/KS + P/KP) with
    // Vf = k2 E_t, Vr = k-1 E_t, KS = (k-1 + k2)/k1, KP = (k-1 + k2)/k-2,
    // and the Haldane relation Keq = Vf KP / (Vr KS) = k1 k2 / (k-1 k-2).
    let ks = "((km1 + k2)/k1)";
    let kp = "((km1 + k2)/km2)";
    let published = format!("(k2*Et*S/{ks} - km1*Et*P/{kp}) / (1 + S/{ks} + P/{kp})");
    assert_same("rate", j["rate"].as_str().unwrap(), &published);
    assert_same("kcat", constant(&j, "kcat"), "k2");
    assert_same("kcat_r", constant(&j, "kcat_r"), "km1");
    assert_same("Km_S", constant(&j, "Km_S"), ks);
    assert_same("Km_P", constant(&j, "Km_P"), kp);
    assert_same("Keq", constant(&j, "Keq"), "k1*k2/(km1*km2)");
    let haldane = &j["relations"][0];
    assert_eq!(haldane["name"], "Haldane");
    assert_eq!(haldane["holds"], true);
    // The relation as printed, evaluated from the constants' definitions.
    let mut vars = Vars::new();
    let rhs = haldane["rhs"].as_str().unwrap();
    let mut text = rhs.to_string();
    for name in ["kcat_r", "kcat", "Km_S", "Km_P"] {
        text = text.replace(name, &format!("({})", constant(&j, name)));
    }
    let lhs = rational(constant(&j, "Keq"), &mut vars);
    assert!(
        lhs.equals(&rational(&text, &mut vars)),
        "Haldane relation {rhs} does not reproduce Keq"
    );
    assert_eq!(j["rate_of"]["reaction"], "S <=> P");
}

#[test]
fn competitive_inhibition_segel_1975() {
    let m = write(
        "comp",
        &inhibited("species EI", "step block E + I <=> EI with ki, kmi", "EI"),
    );
    let j = derive_json(&m.path, &[]);
    // Segel (1975), Enzyme Kinetics, ch. 3: v = V S / (Km (1 + I/Ki) + S), Ki = k-i/ki.
    assert_same(
        "rate",
        j["rate"].as_str().unwrap(),
        "k2*Et*S/((km1 + k2)/k1*(1 + I/(kmi/ki)) + S)",
    );
    assert_same("Ki", constant(&j, "Ki_I"), "kmi/ki");
    assert!(
        j["constants"].get("Kii_I").is_none(),
        "a competitive inhibitor has no intercept constant"
    );
}

#[test]
fn uncompetitive_inhibition_segel_1975() {
    let m = write(
        "uncomp",
        &inhibited(
            "species ESI",
            "step block ES + I <=> ESI with kiu, kmiu",
            "ESI",
        ),
    );
    let j = derive_json(&m.path, &[]);
    // Segel (1975), ch. 3: v = V S / (Km + S (1 + I/Ki')), Ki' = k-i/ki for ESI.
    assert_same(
        "rate",
        j["rate"].as_str().unwrap(),
        "k2*Et*S/((km1 + k2)/k1 + S*(1 + I/(kmiu/kiu)))",
    );
    assert_same("Kii", constant(&j, "Kii_I"), "kmiu/kiu");
    assert!(j["constants"].get("Ki_I").is_none());
}

#[test]
fn mixed_inhibition_segel_1975() {
    let m = write(
        "mixed",
        &inhibited(
            "species EI\nspecies ESI",
            "step block_e E + I <=> EI with ki, kmi\nstep block_es ES + I <=> ESI with kiu, kmiu",
            "EI + ESI",
        )
        .replace(
            "assume steady E, ES, EI + ESI",
            "assume steady E, ES, EI, ESI",
        ),
    );
    let j = derive_json(&m.path, &[]);
    // Segel (1975), ch. 3 (mixed-type, dead-end EI and ESI):
    // v = V S / (Km (1 + I/Ki) + S (1 + I/(alpha Ki))).
    let published = "k2*Et*S/((km1 + k2)/k1*(1 + I/(kmi/ki)) + S*(1 + I/(kmiu/kiu)))";
    assert_same("rate", j["rate"].as_str().unwrap(), published);
    assert_same("Ki", constant(&j, "Ki_I"), "kmi/ki");
    assert_same("Kii", constant(&j, "Kii_I"), "kmiu/kiu");
}

#[test]
fn substrate_inhibition_haldane_1930_segel_1975() {
    let m = write("subinh", SUBSTRATE_INHIBITION);
    let j = derive_json(&m.path, &[]);
    // Segel (1975), ch. 3 (after Haldane 1930): v = V S / (Km + S + S^2/KSi),
    // KSi = k-3/k3 for the dead-end SES complex.
    assert_same(
        "rate",
        j["rate"].as_str().unwrap(),
        "k2*Et*S/((km1 + k2)/k1 + S + S^2/(km3/k3))",
    );
    assert_same("KSi", constant(&j, "Ksi_S"), "km3/k3");
    assert_same("Km", constant(&j, "Km_S"), "(km1 + k2)/k1");
}

/// Cleland (1963) coefficient form of the ordered bi-bi mechanism, as
/// tabulated in Segel (1975), ch. 9 (from memory).
#[test]
fn ordered_bi_bi_cleland_1963() {
    let m = write("ordered", ORDERED_BI_BI);
    let j = derive_json(&m.path, &[]);
    let num = "Et*(k1*k3*k5*k7*A*B - k2*k4*k6*k8*P*Q)";
    let den = "k2*k7*(k4 + k5) + k1*k7*(k4 + k5)*A + k3*k5*k7*B + k2*k4*k6*P + k2*k8*(k4 + k5)*Q \
               + k1*k3*(k5 + k7)*A*B + k6*k8*(k2 + k4)*P*Q + k1*k4*k6*A*P + k3*k5*k8*B*Q \
               + k1*k3*k6*A*B*P + k3*k6*k8*B*P*Q";
    assert_same("numerator", j["numerator"].as_str().unwrap(), num);
    assert_same("denominator", j["denominator"].as_str().unwrap(), den);
    // Cleland's kinetic constants in rate constants (Segel 1975, ch. 9, from memory).
    assert_same("V1/Et", constant(&j, "kcat"), "k5*k7/(k5 + k7)");
    assert_same("V2/Et", constant(&j, "kcat_r"), "k2*k4/(k2 + k4)");
    assert_same("Ka", constant(&j, "Km_A"), "k5*k7/(k1*(k5 + k7))");
    assert_same("Kb", constant(&j, "Km_B"), "k7*(k4 + k5)/(k3*(k5 + k7))");
    assert_same("Kp", constant(&j, "Km_P"), "k2*(k4 + k5)/(k6*(k2 + k4))");
    assert_same("Kq", constant(&j, "Km_Q"), "k2*k4/(k8*(k2 + k4))");
    assert_same("Kia", constant(&j, "Ki_A"), "k2/k1");
    assert_same("Kiq", constant(&j, "Ki_Q"), "k7/k8");
    assert_same("Keq", constant(&j, "Keq"), "k1*k3*k5*k7/(k2*k4*k6*k8)");
    // Cleland's Haldane relation Keq = V1 Kp Kiq / (V2 Kia Kb), checked
    // inside derive and reported.
    assert_eq!(j["relations"][0]["holds"], true);
}

/// Ping-pong bi-bi in Cleland's (1963) coefficient form: no constant term
/// and no A·B·P or B·P·Q terms (Segel 1975, ch. 9, from memory).
#[test]
fn ping_pong_bi_bi_cleland_1963() {
    let m = write("pingpong", PING_PONG);
    let j = derive_json(&m.path, &[]);
    let num = "Et*(k1*k3*k5*k7*A*B - k2*k4*k6*k8*P*Q)";
    let den = "k1*k3*(k6 + k7)*A + k5*k7*(k2 + k3)*B + k2*k4*(k6 + k7)*P + k6*k8*(k2 + k3)*Q \
               + k1*k5*(k3 + k7)*A*B + k1*k4*(k6 + k7)*A*P + k5*k8*(k2 + k3)*B*Q + k4*k8*(k2 + k6)*P*Q";
    assert_same("numerator", j["numerator"].as_str().unwrap(), num);
    assert_same("denominator", j["denominator"].as_str().unwrap(), den);
    assert_same("V1/Et", constant(&j, "kcat"), "k3*k7/(k3 + k7)");
    assert_same("Ka", constant(&j, "Km_A"), "k7*(k2 + k3)/(k1*(k3 + k7))");
    assert_same("Kb", constant(&j, "Km_B"), "k3*(k6 + k7)/(k5*(k3 + k7))");
    // Kia and Kiq: the dissociation constants of EA and of EQ's reverse
    // binding (E + Q), from the A·P and B·Q cross terms (Cleland 1963;
    // Segel 1975, ch. 9, from memory).
    assert_same("Kia", constant(&j, "Ki_A"), "k2/k1");
    assert_same("Kiq", constant(&j, "Ki_Q"), "k7/k8");
    // The ping-pong Haldane relation Keq = (V1/V2)^2 Kp Kq / (Ka Kb)
    // (Segel 1975, ch. 9, from memory), as printed, evaluated from the
    // constants' definitions.
    let haldane = &j["relations"][0];
    assert_eq!(haldane["name"], "Haldane");
    assert_eq!(haldane["holds"], true);
    let rhs = haldane["rhs"].as_str().unwrap();
    let mut text = rhs.to_string();
    for name in ["kcat_r", "kcat", "Km_A", "Km_B", "Km_P", "Km_Q"] {
        text = text.replace(name, &format!("({})", constant(&j, name)));
    }
    let mut vars = Vars::new();
    let keq = rational("k1*k3*k5*k7/(k2*k4*k6*k8)", &mut vars);
    assert!(rational(constant(&j, "Keq"), &mut vars).equals(&keq));
    assert!(
        keq.equals(&rational(&text, &mut vars)),
        "Haldane relation {rhs} does not reproduce Keq"
    );
}

/// Ordered ter-ter (Cleland 1963): the inhibition constants of the first
/// two substrates and the first two products to bind in reverse are the
/// dissociation constants Kia = k-1/k1, Kib = k-2/k2, Kir = k6/k-6 and
/// Kiq = k5/k-5, and the Haldane relation
/// Keq = V1 Kp Kiq Kir / (V2 Kia Kib Kc) holds (Segel 1975, ch. 9, from
/// memory); V1/Et is the reciprocal sum over the three first-order steps
/// after C binds (common practice).
#[test]
fn ordered_ter_ter_cleland_1963() {
    let m = write("orderedter", ORDERED_TER_TER);
    let j = derive_json(&m.path, &[]);
    assert_same("V1/Et", constant(&j, "kcat"), "1/(1/k4 + 1/k5 + 1/k6)");
    assert_same("V2/Et", constant(&j, "kcat_r"), "1/(1/km1 + 1/km2 + 1/km3)");
    assert_same("Kia", constant(&j, "Ki_A"), "km1/k1");
    assert_same("Kib", constant(&j, "Ki_B"), "km2/k2");
    assert_same("Kir", constant(&j, "Ki_R"), "k6/km6");
    assert_same("Kiq", constant(&j, "Ki_Q"), "k5/km5");
    let haldane = &j["relations"][0];
    assert_eq!(haldane["holds"], true);
    let mut text = haldane["rhs"].as_str().unwrap().to_string();
    assert!(
        text.contains("Ki_A*Ki_B*Km_C") && text.contains("Ki_R*Ki_Q*Km_P"),
        "{text}"
    );
    for name in [
        "kcat_r", "kcat", "Ki_A", "Ki_B", "Km_C", "Ki_R", "Ki_Q", "Km_P",
    ] {
        text = text.replace(name, &format!("({})", constant(&j, name)));
    }
    let mut vars = Vars::new();
    let keq = rational("k1*k2*k3*k4*k5*k6/(km1*km2*km3*km4*km5*km6)", &mut vars);
    assert!(keq.equals(&rational(&text, &mut vars)), "Haldane: {text}");
}

/// Theorell & Chance (1951): ordered bi-bi without a kinetically significant
/// ternary complex; coefficient form as in Segel (1975), ch. 9 (from memory).
#[test]
fn theorell_chance_1951() {
    let m = write("tc", THEORELL_CHANCE);
    let j = derive_json(&m.path, &[]);
    let published = "Et*(k1*k3*k5*A*B - k2*k4*k6*P*Q) / (k2*k5 + k1*k5*A + k3*k5*B + k2*k4*P + k2*k6*Q \
                     + k1*k3*A*B + k4*k6*P*Q + k1*k4*A*P + k3*k6*B*Q)";
    assert_same("rate", j["rate"].as_str().unwrap(), published);
    assert_same("Kia", constant(&j, "Ki_A"), "k2/k1");
}

/// Rapid-equilibrium random bi-bi (Segel 1975, ch. 6): with KA = k-1/k1,
/// KB = k-2/k2 and alpha*KB = k-3/k3 (B leaving EAB),
/// v = kcat Et A B / (KA alphaKB + alphaKB A + (KA alphaKB / KB) B + A B);
/// the last coefficient is alpha*KA under detailed balance.
#[test]
fn rapid_equilibrium_random_bi_bi_segel_1975() {
    let m = write("rerandom", RAPID_EQUILIBRIUM_RANDOM_BI_BI);
    let j = derive_json(&m.path, &[]);
    let (ka, kb, akb) = ("(km1/k1)", "(km2/k2)", "(km3/k3)");
    let published = format!("kcat*Et*A*B/({ka}*{akb} + {akb}*A + {ka}*{akb}/{kb}*B + A*B)");
    assert_same("rate", j["rate"].as_str().unwrap(), &published);
    assert_same("kcat", constant(&j, "kcat"), "kcat");
    assert_same("Kia", constant(&j, "Ki_A"), ka);
    assert_same("Km_B (alpha KB)", constant(&j, "Km_B"), akb);
    let notes = j["notes"].to_string();
    assert!(
        notes.contains("cycle") && notes.contains("a_second"),
        "the closed cycle of equilibria is reported: {notes}"
    );
    // The note says in words what is assumed of the step left out (it
    // read "assumes a_second are consistent with them").
    assert!(
        notes.contains(
            "for step a_second, its equilibrium constant equals the one the other equilibria imply"
        ) && notes.contains("product of the equilibrium constants around the cycle is 1"),
        "{notes}"
    );
    assert!(!notes.contains("are consistent"), "{notes}");
}

/// Michaelis & Menten (1913): with the binding step at rapid equilibrium
/// the Michaelis constant is the dissociation constant k-1/k1.
#[test]
fn options_override_assumptions_michaelis_menten_1913() {
    let protease = root().join("models/protease_assay.mech");
    let p = protease.to_string_lossy().to_string();
    let j = derive_json(&protease, &["--equilibrium", "bind"]);
    assert_same("Km", constant(&j, "Km_S"), "k_off/k_on");
    assert_same(
        "rate",
        j["rate"].as_str().unwrap(),
        "k_cat*E_t*S/(k_off/k_on + S)",
    );
    // --steady names the forms explicitly; an unknown name is a usage error.
    let j2 = derive_json(&protease, &["--steady", "E,ES"]);
    assert_same("Km", constant(&j2, "Km_S"), "(k_off + k_cat)/k_on");
    let bad = ratewright(&["derive", &p, "--steady", "E,ESS"]);
    assert_eq!(bad.status.code(), Some(2));
    assert!(
        String::from_utf8_lossy(&bad.stderr).contains("ES"),
        "suggests the close name"
    );
}

// ---------------------------------------------------------------------------
// Diagnostics and the other rate targets.

#[test]
fn nonlinear_steady_state_is_a_located_error() {
    let text = r#"
species S = 1 uM
species P
species E = 0.1 uM
species E2
species E2S
param kd = 1 /uM/s
param kmd = 1 /s
param k1 = 1 /uM/s
param km1 = 1 /s
param k2 = 1 /s
step dimerise E + E <=> E2 with kd, kmd
step bind E2 + S <=> E2S with k1, km1
step cat E2S -> E2 + P with k2
assume steady E, E2, E2S
"#;
    let m = write("dimer", text);
    let p = m.path.to_string_lossy().to_string();
    let out = ratewright(&["derive", &p]);
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("E0601") && err.contains("dimerise") && err.contains("nonlinear"),
        "{err}"
    );
    assert!(err.contains("E + E"), "points at the step text: {err}");
    let json = ratewright(&["derive", &p, "--format", "json"]);
    let v: Value = serde_json::from_slice(&json.stdout).expect("diagnostics as JSON");
    assert!(v.to_string().contains("E0601"));
}

/// A branched mechanism (one complex, two products; common practice): no
/// single overall reaction, so the user picks a species or a step.
#[test]
fn branched_mechanism_rates_per_species_and_per_step() {
    let text = r#"
species S = 10 uM
species P
species Q
species E = 0.01 uM
species ES
param k1 = 1 /uM/s
param km1 = 5 /s
param k2 = 2 /s
param k3 = 3 /s
step bind E + S <=> ES with k1, km1
step to_p ES -> E + P with k2
step to_q ES -> E + Q with k3
total Et = E + ES
assume steady E, ES
"#;
    let m = write("branched", text);
    let p = m.path.to_string_lossy().to_string();
    let out = ratewright(&["derive", &p]);
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("E0602"));
    // Both branches share Km = (k-1 + k2 + k3)/k1 (common practice).
    let km = "((km1 + k2 + k3)/k1)";
    let jp = derive_json(&m.path, &["--species", "P"]);
    assert_same(
        "dP/dt",
        jp["rate"].as_str().unwrap(),
        &format!("k2*Et*S/({km} + S)"),
    );
    let jq = derive_json(&m.path, &["--flux", "to_q"]);
    assert_same(
        "to_q",
        jq["rate"].as_str().unwrap(),
        &format!("k3*Et*S/({km} + S)"),
    );
    let js = derive_json(&m.path, &["--species", "S"]);
    assert_same(
        "dS/dt",
        js["rate"].as_str().unwrap(),
        &format!("-(k2 + k3)*Et*S/({km} + S)"),
    );
}

#[test]
fn size_limit_is_reported_and_can_be_raised() {
    let m = write("rerandom", RAPID_EQUILIBRIUM_RANDOM_BI_BI);
    let p = m.path.to_string_lossy().to_string();
    // Without the rapid-equilibrium lumping the four forms make a ring
    // (E, EA, EAB, EB) with the product step as a chord: a ring of n forms
    // alone has n spanning trees per root (King & Altman 1956), so there are
    // at least 16 single-term trees and a limit of 5 is exceeded.
    let out = ratewright(&["derive", &p, "--equilibrium", "", "--max-terms", "5"]);
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("E0603") && err.contains("--max-terms"),
        "{err}"
    );
    let ok = ratewright(&["derive", &p, "--equilibrium", "", "--max-terms", "1000"]);
    assert!(
        ok.status.success(),
        "{}",
        String::from_utf8_lossy(&ok.stderr)
    );
}

#[test]
fn mech_output_is_a_runnable_mechanism() {
    let dir = tempfile::tempdir().unwrap();
    for model in ["protease_assay", "dehydrogenase_ordered"] {
        let src = root().join(format!("models/{model}.mech"));
        let out = dir.path().join(format!("{model}_rate.mech"));
        let (s, o) = (
            src.to_string_lossy().to_string(),
            out.to_string_lossy().to_string(),
        );
        let r = ratewright(&["derive", &s, "--format", "mech", "-o", &o]);
        assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
        // Values carry their units, so the file checks without warnings,
        // and it is in canonical layout (a pre-commit hook passes it).
        let check = ratewright(&["check", "--deny-warnings", &o]);
        assert!(
            check.status.success(),
            "check rejects the derived mechanism:\n{}\n{}",
            std::fs::read_to_string(&out).unwrap(),
            String::from_utf8_lossy(&check.stderr)
        );
        let fmt = ratewright(&["fmt", "--check", &o]);
        assert!(
            fmt.status.success(),
            "{}",
            String::from_utf8_lossy(&fmt.stderr)
        );
        let csv = dir.path().join(format!("{model}.csv"));
        let run = ratewright(&["run", &o, "--until", "10", "-o", &csv.to_string_lossy()]);
        assert!(
            run.status.success(),
            "{}",
            String::from_utf8_lossy(&run.stderr)
        );
        // The derived law, loaded by the front end, gives the same rate as
        // the JSON form at the file's initial state.
        let loaded = load_path(&out);
        let dm = loaded.model.expect("derived mechanism loads");
        let law = dm.step_rate(0);
        let v_mech = dm.eval_at(&law, &dm.initial_state(), 0.0);
        let j = derive_json(&src, &[]);
        let v_json = eval_rate(j["rate"].as_str().unwrap(), &dm);
        assert!(
            (v_mech - v_json).abs() <= 1e-12 * v_json.abs(),
            "{v_mech} vs {v_json}"
        );
    }
    // The latex form is a math environment.
    let s = root()
        .join("models/protease_assay.mech")
        .to_string_lossy()
        .to_string();
    let tex = ratewright(&["derive", &s, "--format", "latex"]);
    assert!(String::from_utf8_lossy(&tex.stdout).contains("\\frac{"));
}

/// Evaluates a rate string at a model's values (params, fixed, initial
/// species values).
fn eval_rate(text: &str, m: &Model) -> f64 {
    let mut vars = Vars::new();
    let r = rational(text, &mut vars);
    let values: Vec<f64> = (0..vars.len())
        .map(|v| {
            let name = vars.name(v as u32);
            let sym = m
                .lookup(name)
                .unwrap_or_else(|| panic!("`{name}` is not in the model"));
            m.initial_value(sym)
        })
        .collect();
    r.eval(&|v| values[v as usize])
}

// ---------------------------------------------------------------------------
// Numerical check against `steady` on the full mechanism.

/// The file with every non-intermediate species clamped (`fixed`), so the
/// full mechanism has the steady state the derivation assumes; events are
/// dropped (they act on species that are now fixed).
fn clamped(text: &str, forms: &[String]) -> String {
    let mut out = String::new();
    for line in text.lines() {
        let t = line.trim_start();
        if t.starts_with("add ") || t.starts_with("remove ") || t.starts_with("set ") {
            continue;
        }
        if let Some(rest) = t.strip_prefix("species ") {
            let name: String = rest
                .trim_start()
                .chars()
                .take_while(|c| c.is_alphanumeric() || *c == '_')
                .collect();
            let before_comment = rest.split('#').next().unwrap_or("");
            assert!(
                !before_comment.split('"').next().unwrap_or("").contains(','),
                "one species a line expected: {line}"
            );
            if !forms.contains(&name) {
                let has_value = before_comment.split('"').next().unwrap_or("").contains('=');
                let body = if has_value {
                    rest.to_string()
                } else {
                    rest.replacen(&name, &format!("{name} = 1"), 1)
                };
                out.push_str(&format!("fixed {body}\n"));
                continue;
            }
        }
        out.push_str(line);
        out.push('\n');
    }
    out
}

/// A small deterministic generator (splitmix64), so failures reproduce.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }
    /// Log-uniform factor in [1/10, 10].
    fn factor(&mut self) -> f64 {
        10f64.powf(2.0 * self.next() - 1.0)
    }
}

fn steady_check(path: &Path, points: usize) {
    let model = load_path(path)
        .model
        .unwrap_or_else(|| panic!("{} loads", path.display()));
    let forms: Vec<String> = model
        .assumptions
        .steady
        .iter()
        .map(|(i, _)| model.species[*i].name.clone())
        .collect();
    let text = std::fs::read_to_string(path).unwrap();
    let variant = write("clamped", &clamped(&text, &forms));
    let j = derive_json(path, &[]);
    let rate_text = j["rate"].as_str().unwrap().to_string();
    let product = j["rate_of"]["products"]
        .as_object()
        .and_then(|m| m.iter().next())
        .map(|(k, v)| (k.clone(), v.as_f64().unwrap()));
    let (product, nu) = product.expect("an overall reaction with a product");
    let product_index = model
        .species
        .iter()
        .position(|s| s.name == product)
        .unwrap();
    let mut rng = Rng(0x5EED ^ path.to_string_lossy().len() as u64);
    for point in 0..points {
        let mut sets: Vec<(String, f64)> = Vec::new();
        for p in &model.params {
            if let ParamDef::Value(v) = p.definition {
                sets.push((p.name.clone(), v * rng.factor()));
            }
        }
        for (i, s) in model.species.iter().enumerate() {
            if !forms.contains(&s.name) && touched(&model, i) {
                sets.push((s.name.clone(), s.initial.max(1.0) * rng.factor()));
            }
        }
        for f in &model.fixed {
            sets.push((f.name.clone(), f.value * rng.factor()));
        }
        let vp = variant.path.to_string_lossy().to_string();
        let mut args: Vec<String> = vec!["steady".into(), vp, "--format".into(), "json".into()];
        for (n, v) in &sets {
            args.push("--set".into());
            args.push(format!("{n}={v:e}"));
        }
        let argv: Vec<&str> = args.iter().map(String::as_str).collect();
        let out = ratewright(&argv);
        assert!(
            out.status.success(),
            "steady failed at point {point}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let sj: Value = serde_json::from_slice(&out.stdout).unwrap();
        // Full-mechanism flux from the numerical steady state.
        let m = model.with_overrides(&sets).unwrap();
        let y: Vec<f64> = m
            .species
            .iter()
            .map(|s| {
                if forms.contains(&s.name) {
                    sj["state"][&s.name].as_f64().unwrap()
                } else {
                    s.initial
                }
            })
            .collect();
        let numeric: f64 = (0..m.steps.len())
            .flat_map(|k| m.net_change(k).into_iter().map(move |(i, c)| (k, i, c)))
            .filter(|(_, i, _)| *i == product_index)
            .map(|(k, _, c)| ratewright::model::coef_f64(c) * m.eval_at(&m.step_rate(k), &y, 0.0))
            .sum::<f64>()
            / nu;
        // The derived rate at the same values; the total is the forms' sum.
        let mut vars = Vars::new();
        let r = rational(&rate_text, &mut vars);
        let values: Vec<f64> = (0..vars.len())
            .map(|v| {
                let name = vars.name(v as u32);
                match m.lookup(name) {
                    Some(Sym::Total(t)) => m.totals[t]
                        .terms
                        .iter()
                        .map(|(i, c)| ratewright::model::coef_f64(*c) * y[*i])
                        .sum(),
                    Some(s) => m.value_at(s, &y, 0.0),
                    None => panic!("`{name}` unknown"),
                }
            })
            .collect();
        let derived = r.eval(&|v| values[v as usize]);
        let rel = (derived - numeric).abs() / numeric.abs().max(1e-300);
        assert!(
            rel <= 1e-8,
            "{}: point {point}: derived {derived} vs steady {numeric} (rel {rel:e})",
            path.display()
        );
    }
}

fn touched(m: &Model, i: usize) -> bool {
    m.steps.iter().any(|s| {
        s.reactants
            .iter()
            .chain(&s.products)
            .any(|t| t.sym == Sym::Species(i))
    })
}

fn models_with_assumptions() -> Vec<PathBuf> {
    models()
        .into_iter()
        .filter(|p| {
            std::fs::read_to_string(p)
                .map(|t| t.lines().any(|l| l.trim_start().starts_with("assume")))
                .unwrap_or(false)
        })
        .collect()
}

#[test]
fn derived_rates_equal_numerical_steady_state_fluxes() {
    let list = models_with_assumptions();
    assert!(list.len() >= 3, "demo models with `assume` lines: {list:?}");
    for path in list {
        let model = load_path(&path).model.unwrap();
        if !model.assumptions.equilibrium.is_empty() {
            // Rapid equilibrium is a different approximation from the full
            // steady state; its check is the SymPy one below.
            continue;
        }
        steady_check(&path, 20);
    }
    for (name, text) in [
        ("bh", BRIGGS_HALDANE),
        ("pp", PING_PONG),
        ("tc", THEORELL_CHANCE),
        ("si", SUBSTRATE_INHIBITION),
        ("ott", ORDERED_TER_TER),
    ] {
        let m = write(name, text);
        steady_check(&m.path, 20);
    }
}

// ---------------------------------------------------------------------------
// SymPy cross-check.

fn sympy_spec(path: &Path) -> Option<Value> {
    let model = load_path(path).model?;
    let j = derive_json(path, &[]);
    let name = |s: Sym| model.name_of(s).to_string();
    let mut steps = Vec::new();
    for st in &model.steps {
        let side = |terms: &[ratewright::model::Term]| -> Value {
            Value::Object(
                terms
                    .iter()
                    .filter(|t| matches!(t.sym, Sym::Species(_) | Sym::Fixed(_)))
                    .map(|t| {
                        (
                            name(t.sym),
                            serde_json::json!(ratewright::model::coef_f64(t.coefficient) as i64),
                        )
                    })
                    .collect(),
            )
        };
        let Rate::MassAction { forward, reverse } = &st.rate else {
            return None;
        };
        let print = |e: &ratewright::model::Expr| {
            ratewright::algebra::print::print_expr(
                e,
                &name,
                ratewright::algebra::print::Syntax::Mech,
            )
        };
        steps.push(serde_json::json!({
            "name": st.name,
            "reactants": side(&st.reactants),
            "products": side(&st.products),
            "kf": print(forward),
            "kr": reverse.as_ref().map(print),
        }));
    }
    let (product, nu) = j["rate_of"]["products"]
        .as_object()?
        .iter()
        .next()
        .map(|(k, v)| (k.clone(), v.clone()))?;
    Some(serde_json::json!({
        "forms": model.assumptions.steady.iter().map(|(i, _)| model.species[*i].name.clone()).collect::<Vec<_>>(),
        "total": j["totals"][0]["name"],
        "steps": steps,
        "fast": model.assumptions.equilibrium.iter().map(|(k, _)| model.steps[*k].name.clone()).collect::<Vec<_>>(),
        "rate_species": product,
        "nu": nu,
        "derived": j["rate"],
    }))
}

#[test]
fn sympy_solution_of_the_same_linear_system_agrees() {
    let dir = tempfile::tempdir().unwrap();
    let mut paths: Vec<PathBuf> = models_with_assumptions();
    let mut keep = Vec::new();
    for (name, text) in [
        ("bh", BRIGGS_HALDANE.to_string()),
        ("rev", REVERSIBLE.to_string()),
        ("si", SUBSTRATE_INHIBITION.to_string()),
        ("ordered", ORDERED_BI_BI.to_string()),
        ("pp", PING_PONG.to_string()),
        ("tc", THEORELL_CHANCE.to_string()),
        ("rerandom", RAPID_EQUILIBRIUM_RANDOM_BI_BI.to_string()),
        ("fast_release", FAST_RELEASE_ISO.to_string()),
        ("iso_uni_uni", ISO_UNI_UNI.to_string()),
        ("uni_bi", UNI_BI.to_string()),
        ("ordered_ter_bi", ORDERED_TER_BI.to_string()),
        ("partial", PARTIAL_INHIBITION.to_string()),
        ("two_site", TWO_SITE.to_string()),
        ("random_bi_uni", RANDOM_BI_UNI.to_string()),
        ("ordered_fast_q_first", ordered_fast_q_release(true)),
        ("ordered_fast_q_last", ordered_fast_q_release(false)),
        (
            "mixed",
            inhibited(
                "species EI\nspecies ESI",
                "step b1 E + I <=> EI with ki, kmi\nstep b2 ES + I <=> ESI with kiu, kmiu",
                "EI, ESI",
            )
            .replace(
                "total Et = E + ES + EI, ESI",
                "total Et = E + ES + EI + ESI",
            ),
        ),
    ] {
        let w = write(name, &text);
        paths.push(w.path.clone());
        keep.push(w);
    }
    let script = root().join("tests/python/derive_sympy.py");
    let mut failures = Vec::new();
    for (k, path) in paths.iter().enumerate() {
        let spec = sympy_spec(path).unwrap_or_else(|| {
            panic!(
                "{}: mass-action model with an overall product",
                path.display()
            )
        });
        let spec_path = dir.path().join(format!("spec{k}.json"));
        std::fs::write(&spec_path, spec.to_string()).unwrap();
        let out = python(&script, &[&spec_path.to_string_lossy()]);
        let stdout = String::from_utf8_lossy(&out.stdout);
        assert!(
            out.status.success(),
            "SymPy script failed on {}:\n{}",
            path.display(),
            String::from_utf8_lossy(&out.stderr)
        );
        let v: Value = serde_json::from_str(stdout.trim()).unwrap();
        if v["ok"] != true {
            failures.push(format!("{}: {}", path.display(), v["difference"]));
        }
    }
    assert!(
        failures.is_empty(),
        "SymPy disagrees:\n{}",
        failures.join("\n")
    );
}

#[test]
fn an_equilibrium_cycle_that_breaks_detailed_balance_is_noted() {
    // Rapid-equilibrium random bi bi: around the cycle E -> EA -> EAB <- EB
    // <- E the equilibrium constants must multiply to 1 (Wegscheider's
    // condition, Z. Phys. Chem. 39:257, 1901; from memory). Here
    // K(bA)·K(bAB) = 0.1·0.05 = 0.005 and K(bB) = 0.05, so K(bBA) must be 0.1;
    // written as 2/20 it holds, as 2/2000 it is 0.01 times that.
    let dir = tempfile::tempdir().unwrap();
    for (kmba, broken) in [("20", false), ("2000", true)] {
        let path = dir.path().join(format!("random_bibi_{kmba}.mech"));
        std::fs::write(
            &path,
            format!(
                "species A = 50 uM\nspecies B = 200 uM\nspecies P, Q\nspecies E = 0.01 uM\nspecies EA, EB, EAB\n\
                 param ka = 1 /uM/s\nparam kma = 10 /s\nparam kb = 2 /uM/s\nparam kmb = 40 /s\n\
                 param kab = 1 /uM/s\nparam kmab = 20 /s\nparam kba = 2 /uM/s\nparam kmba = {kmba} /s\nparam kcat = 30 /s\n\
                 step bA E + A <=> EA with ka, kma\nstep bB E + B <=> EB with kb, kmb\n\
                 step bAB EA + B <=> EAB with kab, kmab\nstep bBA EB + A <=> EAB with kba, kmba\n\
                 step cat EAB -> E + P + Q with kcat\ntotal E_t = E + EA + EB + EAB\n\
                 assume steady E, EA, EB, EAB\nassume equilibrium bA, bB, bAB, bBA\n"
            ),
        )
        .unwrap();
        let json = derive_json(&path, &[]);
        let notes: Vec<&str> = json["notes"]
            .as_array()
            .unwrap()
            .iter()
            .map(|n| n.as_str().unwrap())
            .collect();
        let flagged: Vec<&&str> = notes
            .iter()
            .filter(|n| n.contains("detailed balance does not hold"))
            .collect();
        if broken {
            assert_eq!(flagged.len(), 1, "{notes:?}");
            assert!(
                flagged[0].contains("bBA") && flagged[0].contains("0.0100 times"),
                "{notes:?}"
            );
        } else {
            assert!(flagged.is_empty(), "{notes:?}");
        }
    }
}

#[test]
fn ping_pong_with_dead_end_substrate_inhibition_names_ksi() {
    // Ping-pong bi bi where B also binds free E (dead end): the denominator
    // gains Ka·B·(B/Ksi), and Ksi_B is the dissociation constant of EB,
    // km5/k5 (Segel 1975, ch. 9, from memory).
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("pp_si.mech");
    std::fs::write(
        &path,
        "species A = 1 uM, B = 1 uM, P, Q\nspecies E = 1 uM, EA, F, FB, EB\n\
         param k1 = 1 /uM/s\nparam km1 = 2 /s\nparam k2 = 3 /s\nparam km2 = 4 /uM/s\n\
         param k3 = 5 /uM/s\nparam km3 = 6 /s\nparam k4 = 7 /s\nparam km4 = 8 /uM/s\n\
         param k5 = 9 /uM/s\nparam km5 = 10 /s\n\
         step s1 E + A <=> EA with k1, km1\nstep s2 EA <=> F + P with k2, km2\n\
         step s3 F + B <=> FB with k3, km3\nstep s4 FB <=> E + Q with k4, km4\n\
         step si E + B <=> EB with k5, km5\nassume steady E, EA, F, FB, EB\n",
    )
    .unwrap();
    let json = derive_json(&path, &[]);
    assert_same("Ksi_B", constant(&json, "Ksi_B"), "km5/k5");
    assert_same(
        "Km_B",
        constant(&json, "Km_B"),
        "k2*(km3 + k4)/(k3*(k2 + k4))",
    );
}

#[test]
fn a_dead_end_inhibitor_of_the_first_complex_gets_its_dissociation_constant() {
    // Ordered bi bi with I binding EA (dead end): the term Kb·A becomes
    // Kb·A·(1 + I/Ki) with Ki = kmi/ki, the dissociation constant of EAI
    // (Segel 1975, ch. 9, from memory).
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("obb_dead.mech");
    std::fs::write(
        &path,
        "species A = 1 uM, B = 1 uM, P, Q, I = 1 uM\nspecies E = 1 uM, EA, EAB, EQ, EAI\n\
         param k1 = 1 /uM/s\nparam km1 = 2 /s\nparam k2 = 3 /uM/s\nparam km2 = 4 /s\n\
         param k3 = 5 /s\nparam km3 = 6 /uM/s\nparam k4 = 7 /s\nparam km4 = 8 /uM/s\n\
         param ki = 9 /uM/s\nparam kmi = 10 /s\n\
         step s1 E + A <=> EA with k1, km1\nstep s2 EA + B <=> EAB with k2, km2\n\
         step s3 EAB <=> EQ + P with k3, km3\nstep s4 EQ <=> E + Q with k4, km4\n\
         step dead EA + I <=> EAI with ki, kmi\nassume steady E, EA, EAB, EQ, EAI\n",
    )
    .unwrap();
    let json = derive_json(&path, &[]);
    assert_same("Ki_I", constant(&json, "Ki_I"), "kmi/ki");
    assert!(json["constants"].get("Kii_I").is_none());
}

// ---------------------------------------------------------------------------
// Issue 14's bug: a rapid-equilibrium step that carries the net flux.

/// Uni-uni with isomerisation, substrate binding and product release at
/// rapid equilibrium, the isomerisation slow (the issue's example). The
/// overall rate read from the fast release step's mass-action rate was 0.
const FAST_RELEASE_ISO: &str = r#"
species S = 50 uM, P
species E = 0.01 uM, ES, EP
param ks_on = 10 /uM/s
param ks_off = 100 /s
param kf = 5 /s
param kr = 1 /s
param kp_off = 300 /s
param kp_on = 3 /uM/s
step s_on  E + S <=> ES  with ks_on, ks_off
step chem  ES <=> EP     with kf, kr
step p_off EP <=> E + P  with kp_off, kp_on
total E_t = E + ES + EP
assume steady E, ES, EP
assume equilibrium s_on, p_off
"#;

/// Ordered bi bi with Q released at rapid equilibrium, written with Q
/// declared before P (the ordering that gave 0) and after.
fn ordered_fast_q_release(q_first: bool) -> String {
    let species = if q_first {
        "species A = 1 uM\nspecies B = 1 uM\nspecies Q = 0.1 uM\nspecies P = 0.1 uM\n"
    } else {
        "species A = 1 uM\nspecies B = 1 uM\nspecies P = 0.1 uM\nspecies Q = 0.1 uM\n"
    };
    format!(
        "{species}species E = 0.01 uM\nspecies EA\nspecies EAB\nspecies EQ\n\
         param k1 = 1 /uM/s\nparam k2 = 2 /s\nparam k3 = 3 /uM/s\nparam k4 = 4 /s\n\
         param k5 = 5 /s\nparam k6 = 6 /uM/s\nparam k7 = 7 /s\nparam k8 = 8 /uM/s\n\
         step s1 E + A <=> EA with k1, k2\nstep s2 EA + B <=> EAB with k3, k4\n\
         step s3 EAB <=> EQ + P with k5, k6\nstep s4 EQ <=> E + Q with k7, k8\n\
         total Et = E + EA + EAB + EQ\nassume steady E, EA, EAB, EQ\nassume equilibrium s4\n"
    )
}

fn rate_of(path: &Path, extra: &[&str]) -> String {
    derive_json(path, extra)["rate"]
        .as_str()
        .unwrap()
        .to_string()
}

/// The rate is the same whichever species or slow step it is read from,
/// and never 0; the issue's expected law (the flux through `chem`).
#[test]
fn a_fast_step_that_carries_the_flux_gives_the_slow_steps_rate() {
    let m = write("fast_release", FAST_RELEASE_ISO);
    let expected = "E_t*(ks_on*kf*kp_off*S - ks_off*kr*kp_on*P)/(ks_off*kp_off + ks_on*kp_off*S + ks_off*kp_on*P)";
    let overall = rate_of(&m.path, &[]);
    assert_same("overall", &overall, expected);
    assert_same("dP/dt", &rate_of(&m.path, &["--species", "P"]), expected);
    assert_same(
        "-dS/dt",
        &format!("-({})", rate_of(&m.path, &["--species", "S"])),
        expected,
    );
    assert_same(
        "flux chem",
        &rate_of(&m.path, &["--flux", "chem"]),
        expected,
    );
    // The derived mechanism moves: its law is not E_t * (0).
    let out = ratewright(&["derive", m.path.to_str().unwrap(), "--format", "mech"]);
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(!text.contains("(0)"), "{text}");

    let mut rates = Vec::new();
    for q_first in [true, false] {
        let w = write("ordered_fast_q", &ordered_fast_q_release(q_first));
        for extra in [
            &[][..],
            &["--species", "P"],
            &["--species", "Q"],
            &["--flux", "s3"],
        ] {
            let r = rate_of(&w.path, extra);
            assert!(r != "0" && !r.contains("(0)"), "{q_first} {extra:?}: {r}");
            rates.push(r);
        }
        assert_same(
            "-dA/dt",
            &format!("-({})", rate_of(&w.path, &["--species", "A"])),
            &rates[0],
        );
    }
    for r in &rates {
        assert_same("every reading, every order", r, &rates[0]);
    }
}

// ---------------------------------------------------------------------------
// Issue 14: the law in its named constants, their values, and inhibition
// patterns.

const ISO_UNI_UNI: &str = r#"
mechanism iso_uni_uni
species A = 5 uM, P = 1 uM
species E = 0.01 uM, EA, F
param k1 = 2 /uM/s
param k2 = 3 /s
param k3 = 4 /s
param k4 = 0.5 /uM/s
param k5 = 6 /s
param k6 = 7 /s
step bind    E + A <=> EA with k1, k2
step release EA <=> F + P with k3, k4
step iso     F <=> E with k5, k6
total Et = E + EA + F
assume steady E, EA, F
"#;

const UNI_BI: &str = r#"
mechanism ordered_uni_bi
species A = 5 uM, P = 1 uM, Q = 1 uM
species E = 0.01 uM, EA, EQ
param k1 = 2 /uM/s
param k2 = 3 /s
param k3 = 4 /s
param k4 = 0.5 /uM/s
param k5 = 6 /s
param k6 = 0.7 /uM/s
step bind  E + A <=> EA with k1, k2
step leave EA <=> EQ + P with k3, k4
step last  EQ <=> E + Q with k5, k6
total Et = E + EA + EQ
assume steady E, EA, EQ
"#;

const ORDERED_TER_BI: &str = r#"
mechanism ordered_ter_bi
species A = 2 uM, B = 3 uM, C = 1.5 uM, P = 0.1 uM, Q = 0.2 uM
species E = 0.01 uM, EA, EAB, EABC, EQ
param k1 = 1.5 /uM/s
param km1 = 2 /s
param k2 = 2.5 /uM/s
param km2 = 3 /s
param k3 = 0.7 /uM/s
param km3 = 4 /s
param k4 = 5 /s
param km4 = 0.6 /uM/s
param k5 = 6 /s
param km5 = 0.8 /uM/s
step s1 E + A <=> EA with k1, km1
step s2 EA + B <=> EAB with k2, km2
step s3 EAB + C <=> EABC with k3, km3
step s4 EABC <=> EQ + P with k4, km4
step s5 EQ <=> E + Q with k5, km5
total Et = E + EA + EAB + EABC + EQ
assume steady E, EA, EAB, EABC, EQ
"#;

/// Partial (hyperbolic) mixed inhibition: ESI still turns over.
const PARTIAL_INHIBITION: &str = r#"
mechanism partial_inhibition
species S = 10 uM, P, I = 2 uM
species E = 0.01 uM, ES, EI, ESI
param k1 = 1 /uM/s
param km1 = 5 /s
param k2 = 2 /s
param ki = 2 /uM/s
param kmi = 4 /s
param kj = 0.5 /uM/s
param kmj = 3 /s
param kp = 0.5 /s
step bind   E + S <=> ES with k1, km1
step cat    ES -> E + P with k2
step e_i    E + I <=> EI with ki, kmi
step es_i   ES + I <=> ESI with kj, kmj
step slow   ESI -> EI + P with kp
total Et = E + ES + EI + ESI
assume steady E, ES, EI, ESI
"#;

/// Two substrate sites, both complexes catalytic: a law of degree two in S.
const TWO_SITE: &str = r#"
mechanism two_site
species S = 10 uM, P
species E = 0.01 uM, ES, ESS
param k1 = 0.2 /uM/s
param km1 = 5 /s
param k2 = 1 /s
param k3 = 2 /uM/s
param km3 = 4 /s
param k4 = 20 /s
step first  E + S <=> ES with k1, km1
step cat1   ES -> E + P with k2
step second ES + S <=> ESS with k3, km3
step cat2   ESS -> ES + P with k4
total Et = E + ES + ESS
assume steady E, ES, ESS
"#;

/// Random bi uni in steady state: squared terms in A and B.
const RANDOM_BI_UNI: &str = r#"
mechanism random_bi_uni
species A = 2 uM, B = 3 uM, P
species E = 0.01 uM, EA, EB, EAB
param k1 = 1 /uM/s
param km1 = 2 /s
param k2 = 3 /uM/s
param km2 = 4 /s
param k3 = 5 /uM/s
param km3 = 6 /s
param k4 = 7 /uM/s
param km4 = 8 /s
param kcat = 9 /s
step a_first  E + A <=> EA with k1, km1
step b_first  E + B <=> EB with k2, km2
step b_second EA + B <=> EAB with k3, km3
step a_second EB + A <=> EAB with k4, km4
step cat      EAB -> E + P with kcat
total Et = E + EA + EB + EAB
assume steady E, EA, EB, EAB
"#;

/// Rapid-equilibrium random bi bi whose products bind too; only the
/// interconversion of the ternary complexes is slow.
const RAPID_EQUILIBRIUM_RANDOM_WITH_PRODUCTS: &str = r#"
mechanism rapid_equilibrium_random_products
species A = 1 uM, B = 1 uM, P = 0.1 uM, Q = 0.1 uM
species E = 0.01 uM, EA, EB, EAB, EPQ, EP, EQ
param k1 = 1 /uM/s
param km1 = 2 /s
param k2 = 3 /uM/s
param km2 = 4 /s
param k3 = 5 /uM/s
param km3 = 6 /s
param k4 = 7 /uM/s
param km4 = 48 /s
param kf = 9 /s
param kr = 1 /s
param kp1 = 10 /s
param kmp1 = 2 /uM/s
param kq1 = 11 /s
param kmq1 = 3 /uM/s
param kp2 = 12 /s
param kmp2 = 4 /uM/s
param kq2 = 13 /s
param kmq2 = 22 /uM/s
step a_first  E + A <=> EA with k1, km1
step b_first  E + B <=> EB with k2, km2
step b_second EA + B <=> EAB with k3, km3
step a_second EB + A <=> EAB with k4, km4
step chem     EAB <=> EPQ with kf, kr
step p_off    EPQ <=> EQ + P with kp1, kmp1
step q_off    EPQ <=> EP + Q with kq1, kmq1
step q_last   EQ <=> E + Q with kq2, kmq2
step p_last   EP <=> E + P with kp2, kmp2
total Et = E + EA + EB + EAB + EPQ + EP + EQ
assume steady E, EA, EB, EAB, EPQ, EP, EQ
assume equilibrium a_first, b_first, b_second, a_second, p_off, q_off, q_last, p_last
"#;

fn competitive() -> String {
    inhibited("species EI", "step block E + I <=> EI with ki, kmi", "EI")
}

fn uncompetitive() -> String {
    inhibited(
        "species ESI",
        "step block ES + I <=> ESI with kiu, kmiu",
        "ESI",
    )
}

fn mixed() -> String {
    inhibited(
        "species EI\nspecies ESI",
        "step block_e E + I <=> EI with ki, kmi\nstep block_es ES + I <=> ESI with kiu, kmiu",
        "EI + ESI",
    )
    .replace(
        "assume steady E, ES, EI + ESI",
        "assume steady E, ES, EI, ESI",
    )
}

/// The textbook mechanisms of issue 14's list.
fn textbook_mechanisms() -> Vec<(&'static str, String)> {
    vec![
        ("briggs_haldane", BRIGGS_HALDANE.to_string()),
        ("reversible", REVERSIBLE.to_string()),
        ("competitive", competitive()),
        ("uncompetitive", uncompetitive()),
        ("mixed", mixed()),
        ("substrate_inhibition", SUBSTRATE_INHIBITION.to_string()),
        ("partial", PARTIAL_INHIBITION.to_string()),
        ("two_site", TWO_SITE.to_string()),
        ("ordered_bi_bi", ORDERED_BI_BI.to_string()),
        ("ping_pong", PING_PONG.to_string()),
        ("theorell_chance", THEORELL_CHANCE.to_string()),
        ("ordered_ter_ter", ORDERED_TER_TER.to_string()),
        ("ordered_ter_bi", ORDERED_TER_BI.to_string()),
        ("iso_uni_uni", ISO_UNI_UNI.to_string()),
        ("uni_bi", UNI_BI.to_string()),
        (
            "re_random_bi_bi",
            RAPID_EQUILIBRIUM_RANDOM_BI_BI.to_string(),
        ),
        (
            "re_random_with_products",
            RAPID_EQUILIBRIUM_RANDOM_WITH_PRODUCTS.to_string(),
        ),
        ("random_bi_uni", RANDOM_BI_UNI.to_string()),
    ]
}

/// Published constants: name and definition in rate constants.
type Definitions = Vec<(&'static str, &'static str)>;
/// A mechanism, its published law in constants, and the constants.
type PublishedForm = (&'static str, String, &'static str, Definitions);
/// A mechanism and its pattern rows: inhibitor, varied, the two patterns.
type PatternTable = (
    &'static str,
    String,
    &'static [(&'static str, &'static str, &'static str)],
);

/// Replaces each whole name of `text` found in `by` with `(definition)`.
fn with_definitions(text: &str, by: &serde_json::Map<String, Value>) -> String {
    let mut out = String::new();
    let mut word = String::new();
    let flush = |word: &mut String, out: &mut String| {
        if word.is_empty() {
            return;
        }
        let starts_name = word
            .chars()
            .next()
            .is_some_and(|c| c.is_alphabetic() || c == '_');
        match by.get(word.as_str()).and_then(Value::as_str) {
            Some(def) if starts_name => out.push_str(&format!("({def})")),
            _ => out.push_str(word),
        }
        word.clear();
    };
    for c in text.chars() {
        if c.is_alphanumeric() || c == '_' || (c == '.' && !word.is_empty()) {
            word.push(c);
        } else {
            flush(&mut word, &mut out);
            out.push(c);
        }
    }
    flush(&mut word, &mut out);
    out
}

/// For every textbook mechanism, the constants form with each constant
/// replaced by its definition is the microscopic rate law, exactly; its
/// identifiable combinations are the coefficient ratios.
#[test]
fn the_constants_form_is_the_microscopic_law_exactly() {
    for (name, text) in textbook_mechanisms() {
        let m = write(name, &text);
        let j = derive_json(&m.path, &[]);
        let form = j["constants_form"]
            .as_str()
            .unwrap_or_else(|| panic!("{name}: no constants form: {}", j["notes"]));
        let constants = j["constants"].as_object().unwrap();
        let substituted = with_definitions(form, constants);
        assert_same(
            &format!("{name}: {form}"),
            &substituted,
            j["rate"].as_str().unwrap(),
        );
        let terms = j["coefficients"]["numerator"].as_array().unwrap().len()
            + j["coefficients"]["denominator"].as_array().unwrap().len();
        assert_eq!(
            j["identifiable_combinations"].as_u64().unwrap() as usize,
            terms - 1,
            "{name}"
        );
        // Every name in the form is a constant, a concentration or the total.
        let mut vars = Vars::new();
        rational(form, &mut vars);
        for v in 0..vars.len() {
            let n = vars.name(v as u32);
            let known = constants.contains_key(n)
                || text.contains(&format!("species {n}"))
                || text.contains(&format!(", {n}"))
                || text.contains(&format!("total {n} "));
            assert!(known, "{name}: `{n}` in {form}");
        }
    }
}

/// Published laws in their constants, with the published definitions in
/// rate constants: each named constant is the textbook one, and the
/// published law is the derived law.
#[test]
fn the_constants_form_is_the_published_form() {
    // (mechanism, published law, published constants): Segel (1975),
    // Enzyme Kinetics, ch. 2-3 and 9; Cleland (1963) Biochim. Biophys.
    // Acta 67:104; Cornish-Bowden, Fundamentals of Enzyme Kinetics, ch. 6
    // (laws and definitions from memory).
    let ordered_law = "kcat*Et*(A*B - P*Q/Keq)/(Ki_A*Km_B + Km_B*A + Km_A*B + A*B \
        + kcat/(kcat_r*Keq)*(Km_Q*P + Km_P*Q + P*Q) + Km_A*B*Q/Ki_Q \
        + kcat*Km_Q*A*P/(kcat_r*Ki_A*Keq) + A*B*P/Ki_P + kcat*B*P*Q/(kcat_r*Ki_B*Keq))";
    let theorell_chance_law = "kcat*Et*(A*B - P*Q/Keq)/(Ki_A*Km_B + Km_B*A + Km_A*B + A*B \
        + kcat/(kcat_r*Keq)*(Km_Q*P + Km_P*Q + P*Q) + Km_A*B*Q/Ki_Q \
        + kcat*Km_Q*A*P/(kcat_r*Ki_A*Keq))";
    let ping_pong_law = "kcat*Et*(A*B - P*Q/Keq)/(Km_B*A + Km_A*B + A*B \
        + kcat/(kcat_r*Keq)*(Km_Q*P + Km_P*Q + P*Q) + Km_A*B*Q/Ki_Q \
        + kcat*Km_Q*A*P/(kcat_r*Ki_A*Keq))";
    let cases: Vec<PublishedForm> = vec![
        (
            "briggs_haldane",
            BRIGGS_HALDANE.into(),
            "kcat*Et*S/(Km_S + S)",
            vec![("kcat", "k2"), ("Km_S", "(km1 + k2)/k1")],
        ),
        (
            "reversible",
            REVERSIBLE.into(),
            "(kcat*Et*S/Km_S - kcat_r*Et*P/Km_P)/(1 + S/Km_S + P/Km_P)",
            vec![
                ("kcat", "k2"),
                ("kcat_r", "km1"),
                ("Km_S", "(km1 + k2)/k1"),
                ("Km_P", "(km1 + k2)/km2"),
            ],
        ),
        (
            "competitive",
            competitive(),
            "kcat*Et*S/(Km_S*(1 + I/Ki_I) + S)",
            vec![
                ("kcat", "k2"),
                ("Km_S", "(km1 + k2)/k1"),
                ("Ki_I", "kmi/ki"),
            ],
        ),
        (
            "uncompetitive",
            uncompetitive(),
            "kcat*Et*S/(Km_S + S*(1 + I/Kii_I))",
            vec![
                ("kcat", "k2"),
                ("Km_S", "(km1 + k2)/k1"),
                ("Kii_I", "kmiu/kiu"),
            ],
        ),
        (
            "mixed",
            mixed(),
            "kcat*Et*S/(Km_S*(1 + I/Ki_I) + S*(1 + I/Kii_I))",
            vec![
                ("kcat", "k2"),
                ("Km_S", "(km1 + k2)/k1"),
                ("Ki_I", "kmi/ki"),
                ("Kii_I", "kmiu/kiu"),
            ],
        ),
        (
            "substrate_inhibition",
            SUBSTRATE_INHIBITION.into(),
            "kcat*Et*S/(Km_S + S + S^2/Ksi_S)",
            vec![
                ("kcat", "k2"),
                ("Km_S", "(km1 + k2)/k1"),
                ("Ksi_S", "km3/k3"),
            ],
        ),
        (
            "ordered_bi_bi",
            ORDERED_BI_BI.into(),
            ordered_law,
            vec![
                ("kcat", "k5*k7/(k5 + k7)"),
                ("kcat_r", "k2*k4/(k2 + k4)"),
                ("Km_A", "k5*k7/(k1*(k5 + k7))"),
                ("Km_B", "k7*(k4 + k5)/(k3*(k5 + k7))"),
                ("Km_P", "k2*(k4 + k5)/(k6*(k2 + k4))"),
                ("Km_Q", "k2*k4/(k8*(k2 + k4))"),
                ("Ki_A", "k2/k1"),
                ("Ki_B", "(k2 + k4)/k3"),
                ("Ki_P", "(k5 + k7)/k6"),
                ("Ki_Q", "k7/k8"),
                ("Keq", "k1*k3*k5*k7/(k2*k4*k6*k8)"),
            ],
        ),
        (
            "theorell_chance",
            THEORELL_CHANCE.into(),
            theorell_chance_law,
            vec![
                ("kcat", "k5"),
                ("kcat_r", "k2"),
                ("Km_A", "k5/k1"),
                ("Km_B", "k5/k3"),
                ("Km_P", "k2/k4"),
                ("Km_Q", "k2/k6"),
                ("Ki_A", "k2/k1"),
                ("Ki_Q", "k5/k6"),
                ("Keq", "k1*k3*k5/(k2*k4*k6)"),
            ],
        ),
        (
            "ping_pong",
            PING_PONG.into(),
            ping_pong_law,
            vec![
                ("kcat", "k3*k7/(k3 + k7)"),
                ("kcat_r", "k2*k6/(k2 + k6)"),
                ("Km_A", "k7*(k2 + k3)/(k1*(k3 + k7))"),
                ("Km_B", "k3*(k6 + k7)/(k5*(k3 + k7))"),
                ("Km_P", "k6*(k2 + k3)/(k4*(k2 + k6))"),
                ("Km_Q", "k2*(k6 + k7)/(k8*(k2 + k6))"),
                ("Ki_A", "k2/k1"),
                ("Ki_Q", "k7/k8"),
                ("Keq", "k1*k3*k5*k7/(k2*k4*k6*k8)"),
            ],
        ),
        // Uni bi and iso uni uni: the laws' shapes as Cleland (1963)
        // tabulates them, with Kip and the iso constant Kiip (from memory);
        // the definitions are the King–Altman solution's (checked against
        // SymPy above), not a table's.
        (
            "uni_bi",
            UNI_BI.into(),
            "kcat*Et*(A - P*Q/Keq)/(Km_A + A + kcat/(kcat_r*Keq)*(Km_Q*P + Km_P*Q + P*Q) + A*P/Ki_P)",
            vec![
                ("kcat", "k3*k5/(k3 + k5)"),
                ("kcat_r", "k2"),
                ("Km_A", "k5*(k2 + k3)/(k1*(k3 + k5))"),
                ("Km_P", "(k2 + k3)/k4"),
                ("Km_Q", "k2/k6"),
                ("Ki_P", "(k3 + k5)/k4"),
                ("Keq", "k1*k3*k5/(k2*k4*k6)"),
            ],
        ),
        (
            "iso_uni_uni",
            ISO_UNI_UNI.into(),
            "kcat*Et*(A - P/Keq)/(Km_A + A + kcat*P/(kcat_r*Keq) + A*P/Kii_P)",
            vec![
                ("kcat", "k3*k5/(k3 + k5)"),
                ("kcat_r", "k2*k6/(k2 + k6)"),
                ("Km_A", "(k2 + k3)*(k5 + k6)/(k1*(k3 + k5))"),
                ("Km_P", "(k2 + k3)*(k5 + k6)/(k4*(k2 + k6))"),
                ("Kii_P", "(k3 + k5)/k4"),
                ("Keq", "k1*k3*k5/(k2*k4*k6)"),
            ],
        ),
        (
            "re_random_bi_bi",
            RAPID_EQUILIBRIUM_RANDOM_BI_BI.into(),
            "kcat*Et*A*B/(Ki_A*Km_B + Km_B*A + Km_A*B + A*B)",
            vec![
                ("kcat", "kcat"),
                ("Ki_A", "km1/k1"),
                ("Km_B", "km3/k3"),
                ("Km_A", "(km1/k1)*(km3/k3)/(km2/k2)"),
            ],
        ),
    ];
    for (name, text, law, published) in cases {
        let m = write(name, &text);
        let j = derive_json(&m.path, &[]);
        let mut definitions = serde_json::Map::new();
        for (constant_name, def) in &published {
            assert_same(
                &format!("{name}: {constant_name}"),
                constant(&j, constant_name),
                def,
            );
            definitions.insert(constant_name.to_string(), Value::from(*def));
        }
        assert_same(
            &format!("{name}: the published law"),
            &with_definitions(law, &definitions),
            j["rate"].as_str().unwrap(),
        );
    }
}

/// Ordered ter bi with the products absent (Segel 1975, ch. 9, from
/// memory): v = V A B C / (Kia Kib Kc + Kib Kc A + Kia Kb C + Kc A B +
/// Kb A C + Ka B C + A B C), Kia and Kib the dissociation constants of A
/// and B.
#[test]
fn ordered_ter_bi_initial_rate_is_the_published_form() {
    let m = write("ordered_ter_bi", ORDERED_TER_BI);
    let j = derive_json(&m.path, &[]);
    assert_same("Kia", constant(&j, "Ki_A"), "km1/k1");
    assert_same("Kib", constant(&j, "Ki_B"), "km2/k2");
    let no_products = |text: &str| {
        let mut by = serde_json::Map::new();
        by.insert("P".into(), Value::from("0"));
        by.insert("Q".into(), Value::from("0"));
        with_definitions(text, &by)
    };
    let law = "kcat*Et*A*B*C/(Ki_A*Ki_B*Km_C + Ki_B*Km_C*A + Ki_A*Km_B*C + Km_C*A*B + Km_B*A*C + Km_A*B*C + A*B*C)";
    let law = with_definitions(law, j["constants"].as_object().unwrap());
    assert_same(
        "ordered ter bi, products absent",
        &no_products(j["rate"].as_str().unwrap()),
        &law,
    );
}

fn patterns(j: &Value) -> Vec<(String, String, String, String)> {
    j["inhibition_patterns"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| {
            let s = |k: &str| p[k].as_str().unwrap().to_string();
            (s("inhibitor"), s("varied"), s("others"), s("pattern"))
        })
        .collect()
}

/// Product inhibition patterns (Cleland 1963; Segel 1975, ch. 9, table of
/// product inhibition patterns, from memory): C competitive, U
/// uncompetitive, N noncompetitive, - none; the other substrate
/// non-saturating, then saturating.
#[test]
fn product_inhibition_patterns_are_the_textbook_tables() {
    let word = |c: char| match c {
        'C' => "competitive",
        'U' => "uncompetitive",
        'N' => "noncompetitive",
        _ => "none",
    };
    let tables: Vec<PatternTable> = vec![
        (
            "ordered_bi_bi",
            ORDERED_BI_BI.into(),
            &[
                ("P", "A", "NU"),
                ("P", "B", "NN"),
                ("Q", "A", "CC"),
                ("Q", "B", "N-"),
            ],
        ),
        (
            "theorell_chance",
            THEORELL_CHANCE.into(),
            &[
                ("P", "A", "N-"),
                ("P", "B", "CC"),
                ("Q", "A", "CC"),
                ("Q", "B", "N-"),
            ],
        ),
        (
            "ping_pong",
            PING_PONG.into(),
            &[
                ("P", "A", "N-"),
                ("P", "B", "CC"),
                ("Q", "A", "CC"),
                ("Q", "B", "N-"),
            ],
        ),
        (
            "re_random_with_products",
            RAPID_EQUILIBRIUM_RANDOM_WITH_PRODUCTS.into(),
            &[
                ("P", "A", "C-"),
                ("P", "B", "C-"),
                ("Q", "A", "C-"),
                ("Q", "B", "C-"),
            ],
        ),
        // One substrate: "others" is empty, both rows agree. Iso uni uni:
        // the product binds the isomerized free enzyme, so it is
        // noncompetitive where uni uni's is competitive (Cleland 1963).
        ("reversible", REVERSIBLE.into(), &[("P", "S", "CC")]),
        ("iso_uni_uni", ISO_UNI_UNI.into(), &[("P", "A", "NN")]),
        (
            "uni_bi",
            UNI_BI.into(),
            &[("P", "A", "NN"), ("Q", "A", "CC")],
        ),
        // Dead-end inhibitors (Segel 1975, ch. 3).
        ("competitive", competitive(), &[("I", "S", "CC")]),
        ("uncompetitive", uncompetitive(), &[("I", "S", "UU")]),
        ("mixed", mixed(), &[("I", "S", "NN")]),
        ("partial", PARTIAL_INHIBITION.into(), &[("I", "S", "NN")]),
    ];
    for (name, text, expected) in tables {
        let m = write(name, &text);
        let got = patterns(&derive_json(&m.path, &[]));
        for (inhibitor, varied, two) in expected.iter() {
            for (which, c) in ["nonsaturating", "saturating"].iter().zip(two.chars()) {
                let row = got
                    .iter()
                    .find(|r| r.0 == *inhibitor && r.1 == *varied && r.2 == *which)
                    .unwrap_or_else(|| {
                        panic!("{name}: no row {inhibitor} vs {varied} ({which}): {got:?}")
                    });
                assert_eq!(
                    row.3,
                    word(c),
                    "{name}: {inhibitor} against {varied}, others {which}"
                );
            }
        }
    }
}

/// Each named constant's value at the file's params, against SymPy's
/// evaluation of the textbook definition with SymPy's units (values in
/// mol/L and s, and the dimension).
#[test]
fn constant_values_agree_with_sympy_and_carry_units() {
    let cases: Vec<(&str, String, Definitions)> = vec![
        (
            "briggs_haldane",
            BRIGGS_HALDANE.into(),
            vec![("kcat", "k2"), ("Km_S", "(km1 + k2)/k1")],
        ),
        (
            "substrate_inhibition",
            SUBSTRATE_INHIBITION.into(),
            vec![("Ksi_S", "km3/k3"), ("Km_S", "(km1 + k2)/k1")],
        ),
        (
            "ordered_bi_bi",
            ORDERED_BI_BI.into(),
            vec![
                ("kcat", "k5*k7/(k5 + k7)"),
                ("Km_B", "k7*(k4 + k5)/(k3*(k5 + k7))"),
                ("Ki_A", "k2/k1"),
                ("Ki_P", "(k5 + k7)/k6"),
                ("Keq", "k1*k3*k5*k7/(k2*k4*k6*k8)"),
            ],
        ),
    ];
    let params_of = |text: &str| -> Vec<(String, String)> {
        text.lines()
            .filter_map(|l| l.trim().strip_prefix("param "))
            .filter_map(|l| l.split_once(" = "))
            .map(|(n, v)| (n.trim().to_string(), v.trim().to_string()))
            .collect()
    };
    let script = root().join("tests/python/derive_values_sympy.py");
    let dir = tempfile::tempdir().unwrap();
    for (name, text, definitions) in cases {
        let m = write(name, &text);
        let j = derive_json(&m.path, &[]);
        let spec = serde_json::json!({
            "params": params_of(&text),
            "constants": definitions.iter().map(|(n, d)| (n.to_string(), d.to_string())).collect::<Vec<_>>(),
        });
        let spec_path = dir.path().join(format!("{name}.json"));
        std::fs::write(&spec_path, spec.to_string()).unwrap();
        let out = python(&script, &[&spec_path.to_string_lossy()]);
        assert!(
            out.status.success(),
            "SymPy script failed: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let expected: Value = serde_json::from_slice(&out.stdout).unwrap();
        let model = load_path(&m.path).model.unwrap();
        for (constant_name, _) in &definitions {
            let got = &j["constant_values"][constant_name];
            let e = &expected[constant_name];
            let (conc, time) = (
                got["dimension"]["concentration"].as_i64().unwrap() as i32,
                got["dimension"]["time"].as_i64().unwrap() as i32,
            );
            assert_eq!(
                (conc as i64, time as i64),
                (
                    e["concentration"].as_i64().unwrap(),
                    e["time"].as_i64().unwrap()
                ),
                "{name}: dimension of {constant_name}"
            );
            // From the model's units to mol/L and s.
            let to_base = model.units.concentration.molar().powi(conc)
                * model.units.time.seconds().powi(time);
            let value = got["value"].as_f64().unwrap() * to_base;
            let reference = e["value"].as_f64().unwrap();
            assert!(
                ((value - reference) / reference).abs() < 1e-12,
                "{name}: {constant_name} = {value} (mol/L, s), SymPy {reference}"
            );
            let unit = ratewright::model::Dim::new(conc, time).display_in(model.units);
            assert_eq!(
                got["unit"].as_str().unwrap(),
                unit,
                "{name}: {constant_name}"
            );
        }
    }
}

/// Substrate inhibition (Haldane 1930; Segel 1975, ch. 3, from memory):
/// v = V S / (Km + S + S^2/Ksi) peaks at S = sqrt(Km Ksi) with
/// v = V / (1 + 2 sqrt(Km/Ksi)); half the peak on the rising side is the
/// smaller root of S^2/Ksi + (1 - 2 V/v_peak) S + Km = 0. kcat is not
/// called the maximal rate. Two-site and random bi-uni laws (higher degree) get a
/// limiting turnover number and K0.5 where v is half the limit.
#[test]
fn higher_degree_laws_get_half_saturation_and_honest_labels() {
    let m = write("si", SUBSTRATE_INHIBITION);
    let j = derive_json(&m.path, &[]);
    let h = &j["half_saturation"][0];
    assert_eq!(h["species"], "S");
    assert_eq!(h["reference"], "peak");
    // File values: k1 = 1, km1 = 5, k2 = 2, k3 = 0.1, km3 = 7, Et = 0.01.
    let (km, ksi, v) = (7.0f64, 70.0f64, 2.0 * 0.01);
    let peak_at = (km * ksi).sqrt();
    let peak = v / (1.0 + 2.0 * (km / ksi).sqrt());
    let close = |a: f64, b: f64| ((a - b) / b).abs() < 1e-6;
    assert!(close(h["peak_at"].as_f64().unwrap(), peak_at), "{h}");
    assert!(close(h["reference_rate"].as_f64().unwrap(), peak), "{h}");
    // v S... = peak/2: S^2/Ksi + (1 - 2 v/peak) S + Km = 0, smaller root.
    let b = 1.0 - 2.0 * v / peak;
    let k_half = (-b - (b * b - 4.0 * km / ksi).sqrt()) / (2.0 / ksi);
    assert!(
        close(h["k_half"].as_f64().unwrap(), k_half),
        "{h} vs {k_half}"
    );
    // Hill number: 4 S v'(S) / peak at K0.5, v' of the published law.
    let dv = v * (km - k_half * k_half / ksi) / (km + k_half + k_half * k_half / ksi).powi(2);
    assert!(
        close(h["hill"].as_f64().unwrap(), 4.0 * k_half * dv / peak),
        "{h}"
    );
    let meaning = j["constant_meanings"]["kcat"].as_str().unwrap();
    assert!(
        meaning.contains("never reaches") && !meaning.contains("maximal"),
        "{meaning}"
    );

    // Two sites, both catalytic: the limit at saturation is k4 (ESS's
    // turnover, common practice); at K0.5 the published-form rate is half.
    let m = write("two_site", TWO_SITE);
    let j = derive_json(&m.path, &[]);
    assert_same("kcat", constant(&j, "kcat"), "k4");
    let h = &j["half_saturation"][0];
    assert_eq!(h["reference"], "limit");
    // Steady state of E, ES, ESS (King & Altman 1956): with K1 =
    // (km1 + k2)/k1 and K2 = (km3 + k4)/k3, v = Et (k2 S/K1 + k4 S^2/(K1 K2))
    // / (1 + S/K1 + S^2/(K1 K2)) (Segel 1975, ch. 7, from memory).
    let (k1, km1, k2, k3, km3, k4, et) = (0.2, 5.0, 1.0, 2.0, 4.0, 20.0, 0.01);
    let (big1, big2) = ((km1 + k2) / k1, (km3 + k4) / k3);
    let rate = |s: f64| {
        et * (k2 * s / big1 + k4 * s * s / (big1 * big2)) / (1.0 + s / big1 + s * s / (big1 * big2))
    };
    let kh = h["k_half"].as_f64().unwrap();
    assert!(close(rate(kh), k4 * et / 2.0), "v(K0.5) = {}", rate(kh));
    let dv = (rate(kh * (1.0 + 1e-6)) - rate(kh * (1.0 - 1e-6))) / (2e-6 * kh);
    assert!(
        (h["hill"].as_f64().unwrap() - 4.0 * kh * dv / (k4 * et)).abs() < 1e-4,
        "{h}"
    );
    assert!(
        h["hill"].as_f64().unwrap() > 1.0,
        "positive cooperativity: {h}"
    );

    // Random bi uni in steady state: squared terms; the limiting turnover
    // number is the catalytic step's constant, and no note calls it missing.
    let m = write("random_bi_uni", RANDOM_BI_UNI);
    let j = derive_json(&m.path, &[]);
    assert_same("kcat", constant(&j, "kcat"), "kcat");
    assert!(
        !j["notes"].to_string().contains("no forward turnover"),
        "{}",
        j["notes"]
    );
    assert_eq!(j["half_saturation"].as_array().unwrap().len(), 2);
}

fn csv_column(path: &Path, name: &str) -> Vec<f64> {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let k = header.iter().position(|h| *h == name).unwrap();
    lines
        .map(|l| l.split(',').nth(k).unwrap().parse().unwrap())
        .collect()
}

/// `derive --format mech --constants` writes a mechanism over the named
/// constants that checks without warnings, is in canonical layout, runs
/// like the microscopic derived law, and follows the full mechanism within
/// the enzyme total (the quasi-steady-state error is of the order of the
/// bound enzyme, Segel & Slemrod 1989, from memory).
#[test]
fn a_mechanism_in_the_named_constants_runs_like_the_original() {
    let dir = tempfile::tempdir().unwrap();
    for (model, product, total) in [
        ("dehydrogenase_ordered", "Ket", 0.02),
        ("pingpong_transferase", "DonK", 0.0),
        ("inhibitor_panel", "P", 0.0),
    ] {
        let src = root().join(format!("models/{model}.mech"));
        let s = src.to_string_lossy().to_string();
        let with_constants = dir.path().join(format!("{model}_constants.mech"));
        let plain = dir.path().join(format!("{model}_plain.mech"));
        let c = with_constants.to_string_lossy().to_string();
        let p = plain.to_string_lossy().to_string();
        let r = ratewright(&["derive", &s, "--format", "mech", "--constants", "-o", &c]);
        assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
        let r = ratewright(&["derive", &s, "--format", "mech", "-o", &p]);
        assert!(r.status.success());
        let text = std::fs::read_to_string(&with_constants).unwrap();
        assert!(
            text.contains("param kcat ") && text.contains("law"),
            "{text}"
        );
        let check = ratewright(&["check", "--deny-warnings", &c]);
        assert!(
            check.status.success(),
            "{text}\n{}",
            String::from_utf8_lossy(&check.stderr)
        );
        assert!(ratewright(&["fmt", "--check", &c]).status.success());
        let mut columns = Vec::new();
        for (k, file) in [&c, &p, &s].iter().enumerate() {
            let csv = dir.path().join(format!("{model}_{k}.csv"));
            let run = ratewright(&["run", file, "--until", "300", "-o", &csv.to_string_lossy()]);
            assert!(
                run.status.success(),
                "{}",
                String::from_utf8_lossy(&run.stderr)
            );
            columns.push(csv_column(&csv, product));
        }
        let scale = columns[1].iter().fold(0.0f64, |a, x| a.max(x.abs()));
        for (a, b) in columns[0].iter().zip(&columns[1]) {
            assert!((a - b).abs() <= 1e-5 * scale, "{model}: {a} vs {b}");
        }
        if total > 0.0 {
            for (a, b) in columns[0].iter().zip(&columns[2]) {
                assert!((a - b).abs() <= total, "{model}: QSS {a} vs full {b}");
            }
        }
    }
    // Without a constants form, or without --format mech, a clear refusal.
    let s = root()
        .join("models/kinase_cycle.mech")
        .to_string_lossy()
        .to_string();
    let r = ratewright(&["derive", &s, "--constants"]);
    assert_eq!(r.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&r.stderr).contains("--format mech"));
}

/// An event described by names (indices differ between a file and the
/// file derived from it).
fn event_by_names(m: &Model, e: &ratewright::model::Event) -> String {
    use ratewright::model::{Action, Timing};
    let when = match &e.timing {
        Timing::At(t) => format!("at {t:?}"),
        Timing::When(trigger) => format!("when {}", trigger.text),
    };
    let what = match &e.action {
        Action::Species {
            kind,
            species,
            amount,
        } => format!("{kind:?} {amount:?} {}", m.species[*species].name),
        Action::Stock { volume, contents } => format!(
            "stock {volume:?} of {:?}",
            contents
                .iter()
                .map(|(s, c)| (m.name_of(*s).to_string(), *c))
                .collect::<Vec<_>>()
        ),
        Action::Withdraw { volume } => format!("withdraw {volume:?}"),
    };
    format!("{when}: {what}")
}

const FED_QSS: &str = "mechanism fed \"a fed well under the quasi-steady state\"
volume 200 uL
temperature 37 C
species E = 0.01 uM, ES = 0
species S = 20 uM, P = 0, I = 0
param k_on = 2 /uM/s at 25 C energy 20 kJ/mol
param k_off = 10 /s
param k_cat = 0.5 /s
step bind E + S <=> ES with k_on, k_off
step turnover ES -> E + P with k_cat
assume steady E, ES
when P > 5 uM: add 4 uL of 50 uM I
every 5 min from 5 min to 25 min: add 5 uL of 2 mM S
remove 20 uL at 700 s
add 1 uM S at 800 s
";

#[test]
fn derive_mech_keeps_the_volume_and_the_whole_protocol() {
    let m = write("fed", FED_QSS);
    let original = load_path(&m.path).model.unwrap();
    for extra in [&[][..], &["--constants"][..]] {
        let out_path = m
            .path
            .with_file_name(format!("derived{}.mech", extra.len()));
        let mut args = vec![
            "derive",
            m.path.to_str().unwrap(),
            "--format",
            "mech",
            "-o",
            out_path.to_str().unwrap(),
        ];
        args.extend_from_slice(extra);
        let o = ratewright(&args);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let derived = load_path(&out_path).model.expect("the derived file loads");
        assert_eq!(derived.volume, original.volume);
        assert_eq!(derived.volume_unit, original.volume_unit);
        let events =
            |m: &Model| -> Vec<String> { m.events.iter().map(|e| event_by_names(m, e)).collect() };
        assert_eq!(events(&derived), events(&original), "{extra:?}");
        // The enzyme total is diluted with the mixture: a fixed species.
        assert!(
            derived.fixed.iter().any(|f| f.name == "E_total"),
            "{:?}",
            derived.fixed
        );
        // The volume follows the same protocol under `run` (the trigger's
        // firings differ only by the quasi-steady-state error in P).
        let volume = |path: &Path| -> Vec<String> {
            let csv = path.with_extension("csv");
            let o = ratewright(&[
                "run",
                path.to_str().unwrap(),
                "--times",
                "100,650,1000,1600",
                "-o",
                csv.to_str().unwrap(),
            ]);
            assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
            let text = std::fs::read_to_string(&csv).unwrap();
            let mut lines = text.lines().filter(|l| !l.starts_with('#'));
            let k = lines
                .next()
                .unwrap()
                .split(',')
                .position(|h| h == "volume")
                .expect("a volume column");
            lines
                .map(|l| l.split(',').nth(k).unwrap().to_string())
                .collect()
        };
        assert_eq!(volume(&out_path), volume(&m.path), "{extra:?}");
    }
}

#[test]
fn derive_mech_refuses_an_event_on_an_eliminated_form() {
    let m = write(
        "form_event",
        &FED_QSS.replace("add 1 uM S at 800 s", "add 0.01 uM E at 800 s"),
    );
    let o = ratewright(&["derive", m.path.to_str().unwrap(), "--format", "mech"]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        !o.status.success(),
        "{}",
        String::from_utf8_lossy(&o.stdout)
    );
    assert!(err.contains("`E`") && err.contains("eliminates"), "{err}");
    // Located: the code and the line of the event.
    assert!(
        err.contains("E0805") && err.contains("form_event.mech:15:"),
        "{err}"
    );
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(!err.contains("panicked"), "{err}");
}
