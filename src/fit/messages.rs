//! Stage 10 of `fit`: the messages of the report. Warnings (things that may
//! make a result unreliable), notes (adjustments and facts worth knowing)
//! and cautions (how to read the results responsibly), each list in the
//! order the report has always shown them.

use super::clusters::{ClusterAdditions, ROBUST_MIN_DF};
use super::estimate::{Fitted, WorkingModel};
use super::readout::ReadOut;
use super::studies::Studies;
use super::FitSettings;
use crate::diagnose::Outputs;
use crate::model::design::Term;
use crate::model::tau2::Tau2Method;
use crate::model::Inference;
use crate::result::{Estimate, FlooredCheck, Interpretation, ModeratorTest};
use crate::support::flag::Flag;
use crate::support::format::{interval, num, p as p_txt};
use crate::support::texts::Texts;

/// Minimum studies per moderator term below which the output cautions
/// (Cochrane Handbook for Systematic Reviews of Interventions, section 10.11.5.1:
/// "at least ten studies for each characteristic modelled"; common practice, cited from memory).
pub const STUDIES_PER_TERM: usize = 10;

/// The caution that moderator effects are associations across studies.
pub const ASSOCIATION_CAUTION: &str =
    "Moderator effects are associations across studies: they are observational even when \
     every study is a randomised trial, can be confounded by other study characteristics, \
     and do not show how the effect changes for individuals (Thompson & Higgins 2002, \
     Stat. Med. 21:1559).";

/// The caution that decisions rest with the responsible professionals.
pub const DECISION_CAUTION: &str =
    "These results summarise published or supplied estimates. Decisions about patients, pupils, \
     programmes or policy rest with the responsible professionals and local guidance, not with \
     this output.";

/// What the messages are about: the outputs of the earlier stages.
#[derive(Debug, Clone, Copy)]
pub struct Inputs<'a> {
    /// The job's settings.
    pub settings: &'a FitSettings,
    /// The studies.
    pub studies: &'a Studies,
    /// The fitted model.
    pub model: &'a Fitted,
    /// The model's terms, intercept first (one per coefficient).
    pub terms: &'a [Term],
    /// Predictions, subgroups and curves.
    pub readout: &'a ReadOut,
    /// The diagnostics, with their own warnings and notes.
    pub diagnostics: &'a Outputs,
    /// Whether the report has an artifact-correction record.
    pub artifacts: bool,
    /// Probes, contrasts and regions.
    pub interpretation: &'a Interpretation,
    /// What `--cluster` added.
    pub clusters: Option<&'a ClusterAdditions>,
    /// The moderator test, when the report has one.
    pub moderator_test: Option<&'a ModeratorTest>,
    /// The average effect.
    pub average: &'a Estimate,
    /// The floored Knapp–Hartung answer, when a factor is below 1.
    pub floored: Option<&'a FlooredCheck>,
}

/// The three lists of messages.
#[derive(Debug, Clone, Default)]
pub struct Messages {
    /// Things that may make a result unreliable.
    pub warnings: Vec<String>,
    /// Adjustments and facts worth knowing.
    pub notes: Vec<String>,
    /// How to read the results responsibly.
    pub cautions: Vec<String>,
}

/// Every warning, note and caution of the report.
pub fn collect(i: &Inputs<'_>) -> Messages {
    let settings = i.settings;
    let k = i.studies.y.len();
    let mut m = Messages {
        warnings: duplicate_label_warnings(&i.studies.labels),
        notes: data_notes(settings, i.studies),
        cautions: cautions(k, i.terms.len(), settings.options.inference),
    };
    m.notes.extend(fit_notes(settings, i.model, i.terms.len()));
    if let Some(f) = i.floored {
        m.notes.push(floored_note(i, f));
    }
    super::route_messages::add(i.studies, &mut m);
    for p in &i.readout.predictions {
        if !p.outside_range.is_empty() {
            m.warnings.push(format!(
                "A prediction is outside the range of the studies for {}: it is an extrapolation.",
                p.outside_range.join(", ")
            ));
        }
    }
    m.warnings.extend(i.diagnostics.warnings.iter().cloned());
    m.notes.extend(i.diagnostics.notes.iter().cloned());
    if i.artifacts {
        artifact_messages(settings, i.studies, &mut m);
    }
    if !i.interpretation.conditional_effects.is_empty()
        || !i.interpretation.regions_of_significance.is_empty()
    {
        m.cautions.push(
            "Conditional effects and regions of significance read the fitted line at chosen \
             values: they are as observational as the moderator test itself, each value or \
             region is a further test (not adjusted for multiplicity), and values outside the \
             studies' range are extrapolations."
                .into(),
        );
    }
    if let Some(c) = i.clusters {
        cluster_messages(i, c, &mut m);
    }
    m
}

/// Notes on the data: zero-cell corrections, blank rows, a missing label column.
fn data_notes(settings: &FitSettings, studies: &Studies) -> Vec<String> {
    let mut notes = Vec::new();
    let corrected: Vec<&str> = studies
        .notes
        .iter()
        .map(|(at, _)| studies.labels.get(*at))
        .collect();
    if !corrected.is_empty() {
        let one = corrected.len() == 1;
        notes.push(format!(
            "{} {} a zero cell: 0.5 was added to each of {} cells ({}).",
            corrected.len(),
            if one { "study had" } else { "studies had" },
            if one { "its" } else { "their" },
            list(&corrected, 5)
        ));
    }
    if let Some(n) = &studies.table.decimal_note {
        notes.push(n.clone());
    }
    if studies.table.blank_rows > 0 {
        notes.push(match studies.table.blank_rows {
            1 => "1 blank row was skipped.".to_string(),
            n => format!("{n} blank rows were skipped."),
        });
    }
    if !studies.table.label_found {
        notes.push(format!(
            "No '{}' column: studies are labelled by their line in the file. Name the label column with {}.",
            settings.label.0,
            Flag::Label
        ));
    }
    notes
}

/// Notes on the fit: τ² estimated as 0, a Knapp–Hartung factor below 1.
fn fit_notes(settings: &FitSettings, model: &Fitted, p: usize) -> Vec<String> {
    let mut notes = Vec::new();
    let fit = &model.fit;
    if fit.tau2.estimate == 0.0 && settings.options.method != Tau2Method::None {
        notes.push(
            "The τ² estimate is 0: the observed spread of the effects is no larger than their \
             sampling error alone would produce. This does not show that the true effects are \
             identical."
                .into(),
        );
    }
    if fit.pi_df < 1.0 {
        let units = match &model.working {
            WorkingModel::ThreeLevel(t) => format!("{} clusters", t.clusters.m()),
            _ => format!("{} studies", fit.k),
        };
        notes.push(format!(
            "No prediction interval{}: it uses t(k − p − 1) (Higgins, Thompson & Spiegelhalter \
             2009, J. R. Stat. Soc. A 172:137), and {units} with {p} coefficient{} leave no degree \
             of freedom for it. More studies are needed to predict the effect in a new study.",
            if p > 1 {
                " from the model with moderators"
            } else {
                ""
            },
            if p == 1 { "" } else { "s" },
        ));
    }
    let null_factor = model.null_scale_factor;
    let below = |s2: f64| s2 < 1.0 - crate::tolerance::KH_BELOW_ONE;
    if settings.options.inference == Inference::KhFloor
        && (below(fit.scale_factor) && p > 1 || below(null_factor))
    {
        let mut which = Vec::new();
        if p > 1 && below(fit.scale_factor) {
            which.push(format!(
                "{:.3} for the model with moderators",
                fit.scale_factor
            ));
        }
        if below(null_factor) {
            which.push(format!("{null_factor:.3} for the average"));
        }
        notes.push(format!(
            "The Knapp–Hartung scale factor was below 1 ({}) and was floored at 1 (kh-floor): \
             the standard errors are the model-based ones, tests and intervals use t.",
            which.join(", ")
        ));
    }
    notes
}

/// The floored answer beside the chosen one, saying plainly whether the
/// conclusion differs (Röver, Knapp & Friede 2015, *BMC Med. Res. Methodol.*
/// 15:99, on the factor below 1).
fn floored_note(i: &Inputs<'_>, f: &FlooredCheck) -> String {
    let chosen = i.settings.options.inference;
    let mut factors = Vec::new();
    let below = |s2: f64| s2 < 1.0 - crate::tolerance::KH_BELOW_ONE;
    if let Some(s2) = f.scale_factor.filter(|s| below(*s)) {
        factors.push(format!("{s2:.3} for the model with moderators"));
    }
    if below(f.scale_factor_average) {
        factors.push(format!("{:.3} for the average", f.scale_factor_average));
    }
    let mut text = format!(
        "The Knapp–Hartung scale factor is below 1 ({}): the studies agree more closely than \
         their sampling variances imply{}. With the factor floored at 1 ({} kh-floor, never \
         narrower than the model-based standard errors):",
        factors.join(", "),
        if chosen == Inference::Kh {
            ", so the default standard errors are smaller than the model-based ones"
        } else {
            ""
        },
        Flag::Inference
    );
    if let (Some(ft), Some(t)) = (&f.moderator_test, i.moderator_test) {
        text.push_str(&format!(
            " moderator test F({}, {}) = {:.2}, p {} (chosen: p {});",
            crate::support::format::df(ft.df1),
            crate::support::format::df(ft.df2),
            ft.statistic,
            p_txt(ft.p),
            p_txt(t.p)
        ));
    }
    if let Some(a) = &f.average {
        text.push_str(&format!(
            " average {} with SE {} and interval {} (chosen: SE {}, {});",
            num(i.average.mean.estimate),
            num(a.se),
            interval(a.ci.ci_low, a.ci.ci_high),
            num(i.average.mean.se),
            interval(i.average.mean.ci.ci_low, i.average.mean.ci.ci_high)
        ));
    }
    text.pop();
    text.push('.');
    text.push_str(if f.conclusion_differs {
        " The conclusion differs: read the chosen answer with care."
    } else {
        " The conclusion is the same."
    });
    text
}

/// The cautions every report carries: few studies per term, moderators as
/// associations, multiple coefficients, few studies, decisions.
fn cautions(k: usize, p: usize, inference: Inference) -> Vec<String> {
    let mut c = Vec::new();
    let terms = p - 1;
    if terms > 0 {
        if k < STUDIES_PER_TERM * terms {
            c.push(format!(
                "Only {k} studies for {terms} moderator term{}: fewer than {STUDIES_PER_TERM} studies \
                 per term (a common rule of thumb, Cochrane Handbook section 10.11.5.1). Treat the \
                 moderator results as exploratory; estimates are unstable and tests have little power.",
                if terms == 1 { "" } else { "s" }
            ));
        }
        c.push(ASSOCIATION_CAUTION.into());
        if terms > 1 {
            c.push(
                "Several coefficients are tested: their individual p-values are not adjusted for \
                 multiple testing. The omnibus moderator test is the single test of whether the \
                 moderators matter."
                    .into(),
            );
        }
    }
    if k < 10 {
        c.push(format!(
            "With {k} studies, τ² and the prediction interval are estimated imprecisely; \
             prediction intervals tend to be too narrow with few studies even with t quantiles \
             (Partlett & Riley 2017, Stat. Med. 36:301){}.",
            match inference {
                Inference::Z =>
                    "; z-based intervals are also too narrow with few studies (the default \
                     Knapp–Hartung method is safer)",
                Inference::Kh | Inference::KhFloor => "",
            }
        ));
    }
    c.push(DECISION_CAUTION.into());
    c
}

/// The warning and cautions that come with artifact corrections.
fn artifact_messages(settings: &FitSettings, studies: &Studies, m: &mut Messages) {
    let over: Vec<&str> = studies
        .y
        .iter()
        .zip(studies.labels.iter())
        .filter(|(y, _)| y.abs() > 1.0)
        .map(|(_, l)| l)
        .collect();
    if !over.is_empty() {
        m.warnings.push(format!(
            "{} corrected correlation{} above 1 in absolute value ({}): sampling error in r or in \
             the artifact values; they are kept uncapped, as capping would bias the mean.",
            over.len(),
            if over.len() == 1 { " is" } else { "s are" },
            list(&over, 5)
        ));
    }
    if let Some(col) = &settings.interpret.artifacts.range_ratio {
        let checked = settings.moderators.iter().any(|m| &m.name == col);
        m.cautions.push(format!(
            "Range restriction differs between studies: a moderator that goes together with it (for \
             example how selective a site is) can show an artifactual moderation, and an imperfect \
             correction leaves part of it in the corrected r. {}",
            if checked {
                format!("The range ratio '{col}' is itself a moderator here: its coefficient is the check.")
            } else {
                format!("As a check, fit with {} {col} (the range ratio itself) and see whether it predicts the corrected effects.", Flag::Moderator)
            }
        ));
    }
    m.cautions.push(
        "Corrected correlations estimate the relation between true scores in the unrestricted \
         population; they rest on the supplied reliabilities and range ratios, whose own errors are \
         not in the intervals."
            .into(),
    );
}

/// How the three-level model's t and F tests get their degrees of freedom:
/// each term by the level at which it varies (the between–within rule of
/// Schluchter & Elashoff 1990, [`crate::model::multilevel::between_within_df`]).
fn df_rule_note(i: &Inputs<'_>) -> String {
    let fit = &i.model.fit;
    let mut groups: Vec<(f64, Vec<&str>)> = Vec::new();
    for (t, &df) in i.terms.iter().zip(&fit.term_df) {
        match groups.iter_mut().find(|(d, _)| *d == df) {
            Some((_, names)) => names.push(t.name.as_str()),
            None => groups.push((df, vec![t.name.as_str()])),
        }
    }
    let parts: Vec<String> = groups
        .iter()
        .map(|(df, names)| {
            format!(
                "{} on {} df",
                names.join(", "),
                crate::support::format::df(*df)
            )
        })
        .collect();
    let fell_back = match &i.model.working {
        WorkingModel::ThreeLevel(t) => t.df.fell_back,
        _ => false,
    };
    format!(
        "Under {} the three-level model's covariance is scaled by r'V⁻¹r/(k − p) (Knapp–Hartung \
         carried over to the block-diagonal V), and each term is tested on the degrees of \
         freedom of the level at which it varies (between–within rule, Schluchter & Elashoff \
         1990): clusters less the terms constant within clusters (the intercept counted), or \
         effects less clusters less the terms that vary within clusters{}. Here: {}.",
        i.settings.options.inference.id(),
        if fell_back {
            "; a level with too few units for its terms keeps k − p for every term"
        } else {
            ""
        },
        parts.join("; ")
    )
}

/// The notes, warnings and caution of clustered effects.
fn cluster_messages(i: &Inputs<'_>, c: &ClusterAdditions, m: &mut Messages) {
    let clusters = c.report.clusters;
    let singles = c.report.single_effect_clusters;
    if let WorkingModel::ThreeLevel(_) = i.model.working {
        m.notes.push(format!(
            "Three-level model: effects nested in {clusters} clusters of '{}'. τ² is the sum of the \
             between- and within-cluster variances; prediction intervals are for a new effect in \
             a new cluster. Variance-component intervals are profile-likelihood intervals.",
            c.report.column
        ));
        if i.settings.options.inference.uses_t() {
            m.notes.push(df_rule_note(i));
        }
    }
    if singles > 0 {
        m.notes.push(format!(
            "{singles} of {clusters} clusters hold a single effect; this is fine (they inform the sum \
             of the two variances more than its split)."
        ));
    }
    if singles == clusters {
        m.warnings.push(
            "Every cluster holds a single effect: the between- and within-cluster variances \
             cannot be told apart, only their sum is estimated."
                .into(),
        );
    }
    if !i.readout.subgroups.is_empty() {
        m.notes.push(format!(
            "With {} the per-level pooled estimates (which would treat the effects as \
             independent) are left out; the model's predicted values per level remain.",
            Flag::Cluster
        ));
    }
    if let Some(robust) = &c.robust {
        m.notes.push(format!(
            "Only the coefficients' robust_se, robust_df, robust_p and the moderator test are \
             cluster-robust; intervals, predictions, fitted lines and {}/{} results \
             use the model-based covariance.",
            Flag::Probe,
            Flag::Regions
        ));
        let low: Vec<String> = i
            .terms
            .iter()
            .zip(&robust.coefficients)
            .filter(|(_, r)| r.df < ROBUST_MIN_DF)
            .map(|(t, r)| format!("{} ({:.1})", t.name, r.df))
            .collect();
        if !low.is_empty() {
            m.warnings.push(format!(
                "Robust degrees of freedom below {ROBUST_MIN_DF}: {}. Robust p-values with so few \
                 effective clusters can be far from their nominal level (Tipton 2015); read them \
                 with great care.",
                low.join(", ")
            ));
        }
        match &robust.test {
            Some(t) if i.moderator_test.is_some() && t.df2 < ROBUST_MIN_DF => {
                m.warnings.push(format!(
                    "The robust moderator test has {:.1} denominator df (below {ROBUST_MIN_DF}): \
                 its p-value is unreliable.",
                    t.df2
                ))
            }
            _ => {}
        }
    }
    m.cautions.push(format!(
        "Effects in the same cluster are dependent; the {clusters} clusters, not the {} effects, are the \
         independent units, and moderators that vary only between clusters are tested with about \
         as much information as {clusters} studies give.",
        i.studies.y.len()
    ));
}

/// A 64-bit hash of a label, read eight bytes at a time: h starts as the
/// length mixed into a fixed seed, each word is mixed in as
/// h = rotl((h ⊕ word)·K, 29) (K odd, so each step is one-to-one in the
/// word), the last word overlapping the one before when the length is not
/// a multiple of eight; shorter labels as one word of their first and last
/// four bytes, or of their first, middle and last byte (every byte read,
/// so labels of one length that differ get different words). The 64-bit
/// finaliser of MurmurHash3 (Appleby 2011; shifts and multipliers cited
/// from memory) then spreads every bit into the top bits, which pick the
/// bucket. The duplicate check compares the labels behind equal hashes
/// exactly, so the hash decides only how fast it is, never what it finds.
fn label_hash(text: &str) -> u64 {
    const K: u64 = 0x9E37_79B9_7F4A_7C15;
    let mix = |h: u64, word: u64| (h ^ word).wrapping_mul(K).rotate_left(29);
    let b = text.as_bytes();
    let n = b.len();
    let word = |i: usize| u64::from_le_bytes(b[i..i + 8].try_into().expect("eight bytes"));
    let half = |i: usize| {
        u64::from(u32::from_le_bytes(
            b[i..i + 4].try_into().expect("four bytes"),
        ))
    };
    let mut h = mix(0x243F_6A88_85A3_08D3, n as u64);
    if n >= 8 {
        let mut i = 0;
        while i + 8 < n {
            h = mix(h, word(i));
            i += 8;
        }
        h = mix(h, word(n - 8));
    } else if n >= 4 {
        h = mix(h, (half(0) << 32) | half(n - 4));
    } else if n > 0 {
        h = mix(
            h,
            (u64::from(b[0]) << 16) | (u64::from(b[n / 2]) << 8) | u64::from(b[n - 1]),
        );
    }
    h ^= h >> 33;
    h = h.wrapping_mul(0xff51_afd7_ed55_8ccd);
    h ^= h >> 33;
    h = h.wrapping_mul(0xc4ce_b9fe_1a85_ec53);
    h ^ (h >> 33)
}

/// The hashes that occur more than once among `hash(0)`, …, `hash(n − 1)`
/// (a hash occurring n times is listed n − 1 times), ascending.
///
/// The hashes are put in 2¹¹ buckets by their top 11 bits (a counting
/// sweep and a sweep placing each hash in its bucket: the first step of a
/// most-significant-digit radix sort, Knuth, TAOCP vol. 3, §5.2.5), in
/// fixed runs of rows on every core, each run's hashes made into a list of
/// the run's own (in the core's cache, no list of all of them); then each bucket (its part of every
/// run, in run order: about 500 hashes at a million studies, in the core's
/// cache) is searched for repeats on its own on every core, each hash
/// looked up in a table of the hashes seen before it in the bucket (open
/// addressing with linear probing, Knuth §6.4 algorithm L; the slot from the
/// top bits of the hash times 2⁶⁴/φ, Fibonacci hashing, §6.4), and the
/// repeats, few as a rule, sorted. The buckets in order give the answer,
/// which does not depend on the thread count.
fn repeated_hashes(n: usize, hash: impl Fn(usize) -> u64 + Sync) -> Vec<u64> {
    use rayon::prelude::*;
    const BITS: u32 = 11;
    const RUN: usize = 1 << 16;
    let bucket = |h: u64| (h >> (64 - BITS)) as usize;
    // Each run's hashes placed by bucket, and where each bucket starts.
    let runs: Vec<(Vec<u64>, Vec<usize>)> = (0..n.div_ceil(RUN))
        .into_par_iter()
        .map(|r| {
            let run: Vec<u64> = (r * RUN..n.min((r + 1) * RUN)).map(&hash).collect();
            let mut starts = vec![0usize; (1 << BITS) + 1];
            for &h in &run {
                starts[bucket(h) + 1] += 1;
            }
            for b in 1..starts.len() {
                starts[b] += starts[b - 1];
            }
            let mut placed = vec![0u64; run.len()];
            let mut next = starts.clone();
            for &h in &run {
                let b = bucket(h);
                placed[next[b]] = h;
                next[b] += 1;
            }
            (placed, starts)
        })
        .collect();
    let repeated: Vec<Vec<u64>> = (0..1usize << BITS)
        .into_par_iter()
        .map_init(Vec::new, |table: &mut Vec<u64>, b| {
            let n: usize = runs.iter().map(|(_, s)| s[b + 1] - s[b]).sum();
            // At most half full; 0 marks an empty slot, so the hash 0 is
            // counted apart.
            let size = (2 * n).next_power_of_two().max(16);
            let shift = 64 - size.trailing_zeros();
            table.clear();
            table.resize(size, 0);
            let (mut zeros, mut found) = (0usize, Vec::new());
            let hashes = runs
                .iter()
                .flat_map(|(placed, starts)| &placed[starts[b]..starts[b + 1]]);
            for &h in hashes {
                if h == 0 {
                    zeros += 1;
                    if zeros > 1 {
                        found.push(0);
                    }
                    continue;
                }
                let mut slot = (h.wrapping_mul(0x9E37_79B9_7F4A_7C15) >> shift) as usize;
                loop {
                    match table[slot] {
                        0 => {
                            table[slot] = h;
                            break;
                        }
                        t if t == h => {
                            found.push(h);
                            break;
                        }
                        _ => slot = (slot + 1) & (size - 1),
                    }
                }
            }
            found.sort_unstable();
            found
        })
        .collect();
    repeated.concat()
}

/// The warning about labels used by more than one study (none when every label is distinct).
fn duplicate_label_warnings(labels: &Texts) -> Vec<String> {
    // Equal labels have equal hashes: the hashes that occur more than once
    // are found first (on every core, [`repeated_hashes`]), and only the
    // labels with such a hash are then compared exactly, as (hash, position)
    // pairs sorted so that equal hashes are adjacent. The pairs are
    // distinct, so the order is the same whatever the number of threads.
    use rayon::prelude::*;
    let mut repeated = repeated_hashes(labels.len(), |i| label_hash(labels.get(i)));
    repeated.dedup();
    let mut keyed: Vec<(u64, usize)> = if repeated.is_empty() {
        Vec::new()
    } else {
        (0..labels.len())
            .into_par_iter()
            .map(|i| (label_hash(labels.get(i)), i))
            .filter(|(h, _)| repeated.binary_search(h).is_ok())
            .collect()
    };
    keyed.sort_unstable();
    let mut counts: Vec<(&str, usize)> = Vec::new();
    let mut start = 0;
    while start < keyed.len() {
        let mut end = start + 1;
        while end < keyed.len() && keyed[end].0 == keyed[start].0 {
            end += 1;
        }
        if end - start > 1 {
            let mut run: Vec<&str> = keyed[start..end]
                .iter()
                .map(|&(_, i)| labels.get(i))
                .collect();
            run.sort_unstable();
            let mut a = 0;
            while a < run.len() {
                let b = a + run[a..].iter().take_while(|l| **l == run[a]).count();
                if b - a > 1 {
                    counts.push((run[a], b - a));
                }
                a = b;
            }
        }
        start = end;
    }
    let mut dups: Vec<String> = counts
        .iter()
        .map(|(l, n)| format!("'{l}' ({n}×)"))
        .collect();
    if dups.is_empty() {
        return Vec::new();
    }
    dups.sort();
    vec![format!(
        "Study labels used more than once: {}. If these are the same study entered twice, remove \
         the copies; if they are separate samples, give them distinct labels.",
        list(&dups, 5)
    )]
}

/// Up to `max` items joined by commas, with "and N more" for the rest.
pub(super) fn list<S: AsRef<str>>(items: &[S], max: usize) -> String {
    crate::support::listing::first_of(items, items.len(), max)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn repeated_labels_are_counted_exactly_and_listed_in_order() {
        let labels: Texts = ["b", "a", "c", "a", "b", "a", "ab", "d"]
            .into_iter()
            .collect();
        assert_eq!(
            duplicate_label_warnings(&labels),
            [
                "Study labels used more than once: 'a' (3×), 'b' (2×). If these are the same \
                 study entered twice, remove the copies; if they are separate samples, give them \
                 distinct labels."
            ]
        );
        let distinct: Texts = (0..5000).map(|i| format!("s{i}")).collect();
        assert!(duplicate_label_warnings(&distinct).is_empty());
        // The buckets give what one sort gives, hashes of every size.
        let mut rng = crate::support::rng::SplitMix64::new(7);
        let mut hashes: Vec<u64> = (0..150_000).map(|_| rng.next_u64()).collect();
        for i in 0..3_000 {
            let h = hashes[i * 7];
            hashes.push(h);
            hashes.push(h >> (i % 64));
        }
        hashes.extend([0, 0, u64::MAX, u64::MAX, u64::MAX]);
        let mut sorted = hashes.clone();
        sorted.sort_unstable();
        let want: Vec<u64> = sorted
            .windows(2)
            .filter(|w| w[0] == w[1])
            .map(|w| w[0])
            .collect();
        assert!(want.len() > 3_000);
        assert_eq!(repeated_hashes(hashes.len(), |i| hashes[i]), want);
        assert!(duplicate_label_warnings(&Texts::default()).is_empty());
    }

    #[test]
    fn labels_of_every_length_that_differ_hash_apart() {
        // Every label of up to three letters from a small alphabet, and
        // labels of 4 to 20 bytes differing in one byte at each place.
        let letters = ["", "a", "b", "é"];
        let mut labels: Vec<String> = Vec::new();
        for x in letters {
            for y in letters {
                for z in letters {
                    labels.push(format!("{x}{y}{z}"));
                }
            }
        }
        labels.sort();
        labels.dedup();
        for n in 4..=20 {
            let base = "x".repeat(n);
            labels.push(base.clone());
            for at in 0..n {
                let mut other = base.clone().into_bytes();
                other[at] = b'y';
                labels.push(String::from_utf8(other).unwrap());
            }
        }
        labels.push("s1234567".into());
        labels.push("s1234567\0".into());
        let mut hashes: Vec<u64> = labels.iter().map(|l| label_hash(l)).collect();
        hashes.sort_unstable();
        hashes.dedup();
        assert_eq!(hashes.len(), labels.len());
        // Repeats of every length class are found.
        let texts: Texts = [
            "abcdefghij",
            "Smith 2019a",
            "abcdefghij",
            "ab",
            "Smith 2019a",
            "ab",
            "abcd",
        ]
        .into_iter()
        .collect();
        assert_eq!(
            duplicate_label_warnings(&texts),
            [
                "Study labels used more than once: 'Smith 2019a' (2×), 'ab' (2×), 'abcdefghij' \
                 (2×). If these are the same study entered twice, remove the copies; if they \
                 are separate samples, give them distinct labels."
            ]
        );
    }
}
