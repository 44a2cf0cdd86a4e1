//! The assay's conditions: the mixture's volume, the temperature, initial
//! values given as amounts, mass concentrations or enzyme activity, and
//! params given at a reference temperature.
//!
//! Invariants: the volume (litres) and temperature (kelvin) are finite and
//! positive; every initial value leaves as a concentration in the model's
//! units; a param with a temperature law holds its value at the assay
//! temperature (at its reference temperature when the file states none).

use super::*;
use crate::diagnostics::{Code, Diagnostic};
use crate::model::lab_units::{self, LabKind, TemperatureDependence, TemperatureLaw, lab_unit};
use crate::model::units::{ConcUnit, Dim, UnitExpr, parse_unit};
use crate::syntax::{Conversion, ConversionKind, Quantity, TemperatureLawAst};

impl Lowerer<'_> {
    /// `volume` and `temperature` lines, read before any declaration (an
    /// amount needs the volume).
    pub(super) fn lower_conditions(&mut self, items: &[Item]) {
        let mut volume_seen: Option<Span> = None;
        let mut temperature_seen: Option<Span> = None;
        for item in items {
            let (seen, word) = match item.kind {
                StatementKind::Volume(_) => (&mut volume_seen, "volume"),
                StatementKind::Temperature(_) => (&mut temperature_seen, "temperature"),
                _ => continue,
            };
            if let Some(first) = *seen {
                self.error(
                    Diagnostic::error(Code::DuplicateStatement, format!("`{word}` is given more than once"))
                        .with_label(item.span, "given again")
                        .with_label(first, "first given here")
                        .with_help(format!("a mixture has one starting {word}; additions and removals change the volume during a run")),
                );
                continue;
            }
            *seen = Some(item.span);
            match item.kind {
                StatementKind::Volume(q) => {
                    if let Some(litres) = self.volume(q)
                        && let Some((text, _)) = &q.unit
                        && let Some((_, factor)) = lab_unit(text)
                    {
                        self.model.volume = self.number(&q.number, q.number_span);
                        debug_assert!(litres > 0.0);
                        self.model.volume_unit = Some((text.clone(), factor.apply(1.0)));
                        self.volume_factor = Some(factor);
                    }
                }
                StatementKind::Temperature(q) => self.model.temperature = self.kelvin(q),
                _ => {}
            }
        }
    }

    /// A volume change in the model's volume unit (the ratio of the two
    /// units is exact: `0.01 mL` in a `uL` mixture is 10).
    pub(super) fn volume_in_model_unit(&mut self, q: &Quantity) -> Option<f64> {
        self.volume(q)?;
        let number = self.number(&q.number, q.number_span)?;
        let (_, factor) = lab_unit(q.unit.as_ref()?.0.as_str())?;
        let model = self.volume_factor?;
        Some(factor.ratio(model)?.apply(number))
    }

    /// A volume in litres, finite and positive.
    pub(super) fn volume(&mut self, q: &Quantity) -> Option<f64> {
        let litres = self.lab_quantity(q, LabKind::Volume)?;
        if litres <= 0.0 {
            self.error(
                Diagnostic::error(Code::BadEvent, "a volume must be positive")
                    .with_label(q.span, "not positive")
                    .with_help("write the volume of liquid, e.g. `200 uL`"),
            );
            return None;
        }
        Some(litres)
    }

    /// A quantity that must carry a unit of `kind`: its value in the SI unit.
    pub(super) fn lab_quantity(&mut self, q: &Quantity, kind: LabKind) -> Option<f64> {
        let value = self.number(&q.number, q.number_span)?;
        let Some((text, span)) = &q.unit else {
            self.error(
                Diagnostic::error(
                    Code::UnknownUnit,
                    format!("`{}` needs a unit: {}", q.number, kind.example()),
                )
                .with_label(q.span, "no unit")
                .with_help("these quantities are always written with their unit"),
            );
            return None;
        };
        match lab_unit(text) {
            Some((k, factor)) if k == kind => Some(factor.apply(value)),
            _ => {
                self.error(
                    Diagnostic::error(
                        Code::UnknownUnit,
                        format!("`{text}` is not {}", kind.example()),
                    )
                    .with_label(*span, "wrong unit")
                    .with_help(format!("write {}", kind.example())),
                );
                None
            }
        }
    }

    /// A temperature in kelvin (`37 C`, `310.15 K`), above absolute zero.
    pub(super) fn kelvin(&mut self, q: &Quantity) -> Option<f64> {
        let value = self.number(&q.number, q.number_span)?;
        let kelvin = q
            .unit
            .as_ref()
            .and_then(|(text, _)| lab_units::kelvin(value, text));
        match kelvin {
            Some(k) if k > 0.0 => Some(k),
            Some(_) => {
                self.error(
                    Diagnostic::error(
                        Code::BadTemperature,
                        "a temperature must lie above absolute zero",
                    )
                    .with_label(q.span, "at or below 0 K")
                    .with_help("write it in C (°C) or K, e.g. `37 C`"),
                );
                None
            }
            None => {
                self.error(
                    Diagnostic::error(
                        Code::BadTemperature,
                        format!("`{}` is not a temperature", source_text(q)),
                    )
                    .with_label(q.span, "needs C or K")
                    .with_help("write a temperature with its unit: `37 C` or `310.15 K`"),
                );
                None
            }
        }
    }

    /// A species' or fixed species' value as written, with its `mass` and
    /// `activity` conversions, as a concentration in the model's units.
    pub(super) fn initial_concentration(
        &mut self,
        q: &Quantity,
        conversions: &[Conversion],
        file_units: Units,
        what: &str,
    ) -> Option<f64> {
        let lab = q.unit.as_ref().and_then(|(text, _)| lab_unit(text));
        let conversion = |kind: ConversionKind| conversions.iter().find(|c| c.kind == kind);
        let Some((kind, factor)) = lab else {
            if let Some(c) = conversions.first() {
                self.error(
                    Diagnostic::error(Code::MissingConversion, "`mass` and `activity` convert a mass concentration or an activity; this value is already a concentration")
                        .with_label(c.value.span, "nothing to convert")
                        .with_help("remove it, or write the value in mg/mL or U/mL"),
                );
            }
            return self.concentration(q, file_units, what);
        };
        let value = factor.apply(self.number(&q.number, q.number_span)?);
        let molar = match kind {
            LabKind::Amount => {
                let Some(litres) = self.model.volume_litres() else {
                    self.needs_volume(q.span, "an amount");
                    return None;
                };
                value / litres
            }
            LabKind::MassConcentration => {
                let grams_per_litre = value;
                let molar_mass = self.molar_mass(q, conversion(ConversionKind::Mass))?;
                grams_per_litre / molar_mass
            }
            LabKind::ActivityConcentration => {
                // U/L = µmol/min/L.
                let units_per_litre = value;
                let Some(activity) = conversion(ConversionKind::Activity) else {
                    self.error(
                        Diagnostic::error(Code::MissingConversion, format!("`{}` is an enzyme activity; turning it into a concentration of active sites needs `activity`", source_text(q)))
                            .with_label(q.span, "activity, not concentration")
                            .with_help("add `activity 40 U/mg mass 28.5 kDa` (specific activity and molar mass) or `activity 600 /min` (turnover per active site)"),
                    );
                    return None;
                };
                let specific = activity.value.unit.as_ref().and_then(|(t, _)| lab_unit(t));
                match specific {
                    Some((LabKind::SpecificActivity, f)) => {
                        let units_per_gram = f.apply(
                            self.number(&activity.value.number, activity.value.number_span)?,
                        );
                        if units_per_gram <= 0.0 {
                            return self.not_positive(&activity.value, "a specific activity");
                        }
                        let molar_mass = self.molar_mass(q, conversion(ConversionKind::Mass))?;
                        units_per_litre / units_per_gram / molar_mass
                    }
                    _ => {
                        // A turnover per site: (µmol/min/L) / (1/s) = mol/L.
                        let per_second = self.turnover(&activity.value)?;
                        units_per_litre * 1e-6 / 60.0 / per_second
                    }
                }
            }
            other => {
                self.error(
                    Diagnostic::error(Code::DimensionMismatch, format!("{what} is a concentration, an amount, a mass concentration or an activity; `{}` is {}", source_text(q), other.example()))
                        .with_label(q.span, "not a concentration")
                        .with_help("write e.g. `20 uM`, `2 nmol` (with a `volume`), `0.1 mg/mL mass 28.5 kDa` or `2 U/mL activity 40 U/mg mass 28.5 kDa`"),
                );
                return None;
            }
        };
        let in_model = UnitExpr {
            conc: Some((ConcUnit::M, 1)),
            time: None,
        }
        .convert(molar, self.model.units);
        in_model.is_finite().then_some(in_model)
    }

    fn molar_mass(&mut self, value: &Quantity, mass: Option<&Conversion>) -> Option<f64> {
        let Some(mass) = mass else {
            self.error(
                Diagnostic::error(
                    Code::MissingConversion,
                    format!(
                        "`{}` needs the molar mass to become a concentration",
                        source_text(value)
                    ),
                )
                .with_label(value.span, "mass, not moles")
                .with_help("add `mass 28.5 kDa` (or g/mol) after the value"),
            );
            return None;
        };
        let grams_per_mole = self.lab_quantity(&mass.value, LabKind::MolarMass)?;
        if grams_per_mole <= 0.0 {
            return self.not_positive(&mass.value, "a molar mass");
        }
        Some(grams_per_mole)
    }

    fn turnover(&mut self, q: &Quantity) -> Option<f64> {
        let parsed = q.unit.as_ref().and_then(|(t, _)| parse_unit(t).ok());
        match parsed {
            Some(u) if u.dim() == Dim::new(0, -1) => {
                let value = self.number(&q.number, q.number_span)?;
                let per_second = u.convert(
                    value,
                    Units {
                        time: crate::model::TimeUnit::S,
                        ..self.model.units
                    },
                );
                if per_second <= 0.0 {
                    return self.not_positive(q, "a turnover");
                }
                Some(per_second)
            }
            _ => {
                self.error(
                    Diagnostic::error(Code::MissingConversion, format!("`activity {}` is neither a specific activity (U/mg) nor a turnover per active site (e.g. /min)", source_text(q)))
                        .with_label(q.span, "not an activity")
                        .with_help("write `activity 40 U/mg` (with `mass`) or `activity 600 /min`"),
                );
                None
            }
        }
    }

    fn not_positive(&mut self, q: &Quantity, what: &str) -> Option<f64> {
        self.error(
            Diagnostic::error(Code::BadNumber, format!("{what} must be positive"))
                .with_label(q.span, "not positive"),
        );
        None
    }

    pub(super) fn needs_volume(&mut self, span: Span, what: &str) {
        self.error(
            Diagnostic::error(
                Code::NeedsVolume,
                format!("{what} needs the mixture's volume, and the file declares none"),
            )
            .with_label(span, "needs a volume")
            .with_help("declare the starting volume, e.g. `volume 200 uL`"),
        );
    }

    /// `param k = 12 /s at 25 C energy 55 kJ/mol` (and the Eyring forms):
    /// the value at the assay temperature, and the law kept for `--set
    /// temperature=...`.
    pub(super) fn temperature_param(
        &mut self,
        index: usize,
        value: &Quantity,
        reference: &Quantity,
        law: &TemperatureLawAst,
        file_units: Units,
    ) {
        let Some((reference_value, dim)) = self.quantity(value, file_units) else {
            return;
        };
        let Some(reference_kelvin) = self.kelvin(reference) else {
            return;
        };
        let Some(law) = self.temperature_law(law) else {
            return;
        };
        // The absolute Eyring form gives 1/s for a first-order constant;
        // higher orders carry the standard concentration 1 M per extra
        // reactant (common practice).
        let order_dim = dim.unwrap_or(Dim::new(0, -1));
        let absolute_scale = UnitExpr {
            conc: Some((ConcUnit::M, order_dim.conc)),
            time: Some((crate::model::TimeUnit::S, -1)),
        }
        .convert(1.0, self.model.units);
        let dependence = TemperatureDependence {
            reference_value,
            reference: reference_kelvin,
            law,
            absolute_scale,
        };
        if let TemperatureLaw::Eyring {
            entropy: Some(_), ..
        } = law
        {
            let eyring = dependence.at(reference_kelvin);
            if (eyring - reference_value).abs() > 1e-3 * reference_value.abs() {
                let span = self.model.params[index].span;
                self.error(
                    Diagnostic::warning(Code::EyringValueDiffers, format!("the Eyring equation with this enthalpy and entropy gives {} at {}, not the {} written", lower_fmt(eyring), source_text(reference), lower_fmt(reference_value)))
                        .with_label(span, "two values for one constant")
                        .with_help("the enthalpy and entropy are used; write the value they give, or drop `entropy` to scale the written value"),
                );
            }
        }
        if self.model.temperature.is_none() {
            let span = self.model.params[index].span;
            self.error(
                Diagnostic::warning(Code::TemperatureIgnored, "a value at a reference temperature, but the file gives no assay temperature: the value is used as written")
                    .with_label(span, "no `temperature` line")
                    .with_help("add `temperature 37 C` (or the assay's temperature)"),
            );
        }
        let param = &mut self.model.params[index];
        param.dim = dim;
        self.model.temperature_laws.push((index, dependence));
        let kelvin = self.model.temperature.unwrap_or(reference_kelvin);
        let v = dependence.at(kelvin);
        let param = &mut self.model.params[index];
        param.definition = ParamDef::Value(v);
        param.value = v;
    }
}

impl Lowerer<'_> {
    fn temperature_law(&mut self, law: &TemperatureLawAst) -> Option<TemperatureLaw> {
        Some(match law {
            TemperatureLawAst::Energy(e) => TemperatureLaw::Arrhenius {
                energy: self.lab_quantity(e, LabKind::MolarEnergy)?,
            },
            TemperatureLawAst::Enthalpy(h, s) => TemperatureLaw::Eyring {
                enthalpy: self.lab_quantity(h, LabKind::MolarEnergy)?,
                entropy: match s {
                    Some(s) => Some(self.lab_quantity(s, LabKind::MolarEntropy)?),
                    None => None,
                },
            },
        })
    }
}

fn source_text(q: &Quantity) -> String {
    match &q.unit {
        Some((u, _)) => format!("{} {u}", q.number),
        None => q.number.clone(),
    }
}

fn lower_fmt(v: f64) -> String {
    super::diagnostics::fmt_num(v)
}
