//! The names of the command-line flags, for the library's messages.
//!
//! A library error or note that tells the user which flag to change names it
//! through [`Flag`], not a string literal: the binary's tests check every
//! value here against its clap definitions (the flag exists, and exactly the
//! subcommands listed take it), so a renamed or removed flag cannot leave a
//! message that names a flag the tool does not have. The layout test
//! (`tests/integration/layout.rs`) scans the library's sources (all of
//! `src/` but the binary's `src/cli/`) and fails on a string literal that
//! spells a flag out.

use std::fmt;

/// Declares [`Flag`], its name and the subcommands that take it, from one table.
macro_rules! flags {
    ($($variant:ident => $name:literal, [$($command:literal),+];)+) => {
        /// A long flag of the `pondus` command line.
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
        pub enum Flag {
            $(
                #[doc = concat!("`", $name, "`.")]
                $variant,
            )+
        }

        impl Flag {
            /// Every flag, in the order `pondus <command> --help` first lists it
            /// (fit, plan, sites, sql, manual).
            pub const ALL: &'static [Flag] = &[$(Flag::$variant),+];

            /// The flag as typed, with its leading `--` (e.g. `"--probe"`).
            pub fn name(self) -> &'static str {
                match self {
                    $(Flag::$variant => $name,)+
                }
            }

            /// The subcommands that take this flag.
            pub fn commands(self) -> &'static [&'static str] {
                match self {
                    $(Flag::$variant => &[$($command),+],)+
                }
            }
        }
    };
}

flags! {
    Measure => "--measure", ["fit", "plan", "columns"];
    Col => "--col", ["fit"];
    CiLevel => "--ci-level", ["fit"];
    EffectScale => "--effect-scale", ["fit"];
    Convert => "--convert", ["fit"];
    Sheet => "--sheet", ["fit", "plan", "sites"];
    Decimal => "--decimal", ["fit", "plan", "sites"];
    Label => "--label", ["fit"];
    Moderator => "--moderator", ["fit", "sites"];
    Categorical => "--categorical", ["fit"];
    Reference => "--reference", ["fit"];
    Interaction => "--interaction", ["fit"];
    Center => "--center", ["fit"];
    SpreadBy => "--spread-by", ["fit"];
    Tau2 => "--tau2", ["fit", "plan", "sites"];
    Inference => "--inference", ["fit", "sites"];
    Level => "--level", ["fit", "sites"];
    At => "--at", ["fit"];
    Json => "--json", ["fit", "plan", "sites"];
    Table => "--table", ["fit", "sql"];
    Forest => "--forest", ["fit"];
    Sort => "--sort", ["fit"];
    ShowFitted => "--show-fitted", ["fit"];
    Bubble => "--bubble", ["fit"];
    BubbleX => "--bubble-x", ["fit"];
    Funnel => "--funnel", ["fit"];
    Contours => "--contours", ["fit"];
    SensitivityPlot => "--sensitivity-plot", ["fit"];
    InfluencePlot => "--influence-plot", ["fit"];
    Width => "--width", ["fit"];
    Height => "--height", ["fit"];
    Dpi => "--dpi", ["fit", "plan"];
    Title => "--title", ["fit"];
    XLabel => "--x-label", ["fit"];
    Columns => "--columns", ["fit"];
    GroupBy => "--group-by", ["fit"];
    FontSize => "--font-size", ["fit"];
    Quiet => "--quiet", ["fit", "plan", "sites"];
    Report => "--report", ["fit", "plan", "sites"];
    Probe => "--probe", ["fit"];
    CompareLevels => "--compare-levels", ["fit"];
    Regions => "--regions", ["fit"];
    ReliabilityX => "--reliability-x", ["fit"];
    ReliabilityY => "--reliability-y", ["fit"];
    RangeRatio => "--range-ratio", ["fit"];
    Loo => "--loo", ["fit"];
    Influence => "--influence", ["fit"];
    Permutations => "--permutations", ["fit"];
    Seed => "--seed", ["fit", "plan"];
    SmallStudy => "--small-study", ["fit"];
    CumulativeBy => "--cumulative-by", ["fit"];
    Selection => "--selection", ["fit"];
    Favoured => "--favoured", ["fit"];
    SelectionForce => "--selection-force", ["fit"];
    Cluster => "--cluster", ["fit"];
    Levels => "--levels", ["fit"];
    Robust => "--robust", ["fit", "sites"];
    Shrink => "--shrink", ["fit"];
    Beyond => "--beyond", ["fit"];
    AllSubsets => "--all-subsets", ["fit"];
    K => "--k", ["plan"];
    N => "--n", ["plan"];
    Variance => "--variance", ["plan"];
    ModeratorSd => "--moderator-sd", ["plan"];
    Share => "--share", ["plan"];
    ModeratorValues => "--moderator-values", ["plan"];
    ModeratorEffect => "--moderator-effect", ["plan"];
    Alpha => "--alpha", ["plan"];
    Test => "--test", ["plan"];
    TargetPower => "--target-power", ["plan"];
    Solve => "--solve", ["plan"];
    MaxK => "--max-k", ["plan"];
    MaxN => "--max-n", ["plan"];
    Simulate => "--simulate", ["plan"];
    Curve => "--curve", ["plan"];
    Site => "--site", ["sites", "sql"];
    X => "--x", ["sites", "sql"];
    Y => "--y", ["sites", "sql"];
    W => "--w", ["sites", "sql"];
    Covariate => "--covariate", ["sites", "sql"];
    Effect => "--effect", ["sites"];
    Treat => "--treat", ["sites"];
    Event => "--event", ["sites"];
    Engine => "--engine", ["sql"];
    Moments => "--moments", ["sites"];
    Info => "--info", ["sites"];
    InfoKey => "--info-key", ["sites"];
    Out => "--out", ["sites"];
    CenterWithin => "--center-within", ["sites"];
    Fit => "--fit", ["sites"];
    OneStage => "--one-stage", ["sites"];
    OutDir => "--out-dir", ["manual"];
}

impl fmt::Display for Flag {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl From<Flag> for String {
    fn from(flag: Flag) -> Self {
        flag.name().to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_distinct_long_flags() {
        let mut seen = std::collections::HashSet::new();
        for f in Flag::ALL {
            let name = f.name();
            assert!(name.starts_with("--") && name.len() > 2, "{name}");
            assert!(
                name[2..]
                    .chars()
                    .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-'),
                "{name}"
            );
            assert!(seen.insert(name), "{name} twice");
            assert!(!f.commands().is_empty(), "{name}");
        }
        assert_eq!(Flag::Probe.to_string(), "--probe");
        assert_eq!(String::from(Flag::CompareLevels), "--compare-levels");
    }
}
