//! Stable diagnostic codes. A code, once published, keeps its meaning: new
//! problems get new codes. Ranges: E01 syntax and files, E02 names, E03 units,
//! E04 model rules, E05 conservation, E06 rate-law derivation, E07 numerics,
//! E08 command line and output; E09 assay data and fitting; W.. warnings.

macro_rules! codes {
    ($($variant:ident => $text:literal, $title:literal;)*) => {
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
        pub enum Code { $($variant,)* }
        impl Code {
            /// The stable code, e.g. `E0201`.
            pub fn as_str(self) -> &'static str {
                match self { $(Code::$variant => $text,)* }
            }
            /// A short title for documentation tables.
            pub fn title(self) -> &'static str {
                match self { $(Code::$variant => $title,)* }
            }
            pub fn all() -> &'static [Code] {
                &[$(Code::$variant,)*]
            }
        }
    };
}

codes! {
    Syntax => "E0101", "syntax error";
    FileRead => "E0102", "file cannot be read";
    NotUtf8 => "E0103", "file is not UTF-8";
    NestingTooDeep => "E0104", "parentheses nested too deeply";
    UseCycle => "E0105", "cyclic `use`";
    InputTooLarge => "E0106", "input exceeds a size limit";
    BadNumber => "E0107", "number out of range or not finite";
    UnclosedParen => "E0108", "unbalanced parentheses";

    UnknownName => "E0201", "unknown name";
    DuplicateName => "E0202", "duplicate name";
    ReservedName => "E0203", "reserved name";
    WrongKind => "E0204", "name of the wrong kind here";
    UnknownFunction => "E0205", "unknown function";
    WrongArity => "E0206", "wrong number of arguments";

    UnknownUnit => "E0301", "unknown unit";
    DimensionMismatch => "E0302", "dimension mismatch";
    AmbiguousQuantity => "E0303", "quantity or expression is ambiguous";
    UnitInExpression => "E0304", "unit not allowed here";

    MissingReverseConstant => "E0401", "reversible step without a reverse constant";
    ExtraReverseConstant => "E0402", "irreversible step with two constants";
    ParamCycle => "E0403", "cyclic parameter definitions";
    NegativeInitial => "E0404", "negative initial value";
    EventTarget => "E0405", "event on something that is not a species";
    DuplicateStatement => "E0406", "statement given more than once";
    BadCoefficient => "E0407", "invalid stoichiometric coefficient";
    BadParamValue => "E0408", "parameter value cannot be evaluated";
    BadEvent => "E0409", "invalid event";
    BadAssumption => "E0410", "invalid assumption";
    NegativeRateConstant => "E0411", "negative rate constant";
    NeedsVolume => "E0412", "amount or volume change without a declared volume";
    VolumeExhausted => "E0413", "withdrawal larger than the volume left";
    MissingConversion => "E0414", "mass or activity unit without its conversion";
    BadTemperature => "E0415", "invalid temperature or temperature law";
    BadCondition => "E0416", "invalid condition of a triggered event";

    TotalNotConserved => "E0501", "total is not conserved";
    TotalInconsistent => "E0502", "total value inconsistent with initial values";
    TotalEmpty => "E0503", "total has no species";

    NonlinearSteadyState => "E0601", "no closed-form steady state";
    NoOverallReaction => "E0602", "no overall reaction to derive";
    ExpressionTooLarge => "E0603", "derived expression exceeds the size limit";
    BadDerivationRequest => "E0604", "invalid derivation request";

    SolverFailed => "E0701", "numerical integration failed";
    NoSteadyState => "E0702", "no steady state found";
    BadNumericInput => "E0703", "numerical input out of range";
    NotCountable => "E0704", "step or value that has no molecule-count form";
    NegativePropensity => "E0705", "rate law negative at a reached state";
    CountOutOfRange => "E0706", "molecule count out of range";

    BadOption => "E0801", "invalid command-line value";
    OutputRefused => "E0802", "output refused";
    WriteFailed => "E0803", "output could not be written";
    GitRead => "E0804", "file cannot be read from git";
    TargetCannotExpress => "E0805", "the target cannot express part of the model";

    BadData => "E0901", "assay data cannot be used";
    BadFitRequest => "E0902", "invalid fit request";
    FitFailed => "E0903", "the fit failed";

    UnusedParam => "W0101", "unused parameter";
    UntouchedSpecies => "W0102", "species that no step touches";
    NoOpStep => "W0103", "step whose two sides are equal";
    LawDimensionUnknown => "W0104", "dimension of a rate law cannot be inferred";
    ConsumedOnly => "W0105", "species only ever consumed, with no source";
    LawDimensionMismatch => "W0106", "rate law does not have the dimension of a rate";
    LawAsPropensity => "W0107", "rate law used as a propensity (an approximation)";
    NamesEqualWhenNormalized => "W0108", "two names that differ only in Unicode normalisation";
    EyringValueDiffers => "W0109", "value at the reference temperature differs from the Eyring equation's";
    TemperatureIgnored => "W0110", "temperature law without an assay temperature";
}
