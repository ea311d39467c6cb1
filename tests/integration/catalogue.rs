//! The bad-input catalogue: every class of bad input below is run through
//! the `pondus` binary; each must exit with the expected code and print a
//! message containing the expected words, and `docs/reliability.md` must
//! show the message the user sees (its first line) for every case, so the
//! documented behaviour is the tested behaviour.
//!
//! After changing a message, rewrite the catalogue section of the document
//! with `PONDUS_WRITE_CATALOGUE=1 cargo test --test integration catalogue`.

use crate::util::repo;
use assert_cmd::Command;

/// One case: a name, what is wrong, the command (`{in}` stands for the
/// input file, `{dir}` for a scratch folder), the input file's bytes (None:
/// no file is written), what is fed on standard input, the exit code and
/// words the message must contain.
pub(crate) struct Case {
    pub(crate) id: &'static str,
    what: &'static str,
    pub(crate) args: &'static str,
    input: Option<&'static [u8]>,
    stdin: &'static [u8],
    code: i32,
    words: &'static [&'static str],
}

const PLAIN: &[u8] =
    b"study,effect,variance,m\na,0.1,0.01,1\nb,0.3,0.02,2\nc,0.2,0.015,3\nd,0.25,0.01,4\n";

const SPREAD: &[u8] = b"study,effect,variance,c,g\ns1,0.1,0.01,1,a\ns2,0.5,0.02,1,a\ns3,0.2,0.01,1,b\ns4,0.9,0.03,1,b\ns5,0.3,0.02,1,c\ns6,0.7,0.01,1,b\n";

pub(crate) const CASES: &[Case] = &[
    Case { id: "missing-file", what: "the input file does not exist", args: "fit {dir}/nope.csv", input: None, stdin: b"", code: 2, words: &["nope.csv"] },
    Case { id: "directory", what: "the input path is a folder", args: "fit {dir}", input: None, stdin: b"", code: 2, words: &["directory"] },
    Case { id: "empty-file", what: "the file is empty", args: "fit {in}", input: Some(b""), stdin: b"", code: 2, words: &["empty"] },
    Case { id: "header-only", what: "a header and no rows", args: "fit {in}", input: Some(b"study,effect,variance\n"), stdin: b"", code: 2, words: &["no data rows"] },
    Case { id: "not-utf8", what: "bytes that are not UTF-8 (a Latin-1 export)", args: "fit {in}", input: Some(b"study,effect,variance\nM\xfcller,0.1,0.01\nb,0.2,0.02\n"), stdin: b"", code: 2, words: &["UTF-8", "line 2"] },
    Case { id: "ragged-row", what: "a row with more fields than the header", args: "fit {in}", input: Some(b"study,effect,variance\na,0.1,0.01\nb,0.2,0.02,9\n"), stdin: b"", code: 2, words: &["line 3"] },
    Case { id: "missing-column", what: "a column the measure needs is absent", args: "fit {in} --measure r", input: Some(PLAIN), stdin: b"", code: 2, words: &["'r'", "--col"] },
    Case { id: "text-in-number", what: "text in a numeric column", args: "fit {in}", input: Some(b"study,effect,variance\na,0.1,0.01\nb,high,0.02\n"), stdin: b"", code: 2, words: &["line 3", "'effect'", "high"] },
    Case { id: "thousands-separator", what: "a thousands separator", args: "fit {in}", input: Some(b"study,effect,variance\na,\"1,234\",0.01\nb,0.2,0.02\n"), stdin: b"", code: 2, words: &["line 2", "1,234", "thousands"] },
    Case { id: "decimal-comma-mixed", what: "decimal commas and decimal points in one semicolon-separated file", args: "fit {in}", input: Some(b"study;effect;variance\na;0,25;0.01\nb;0,3;0.02\n"), stdin: b"", code: 2, words: &["line 2", "0,25", "0.01", "--decimal"] },
    Case { id: "decimal-comma-ambiguous", what: "commas that may be decimal commas or thousands separators", args: "fit {in}", input: Some(b"study;effect;variance\na;1,250;1\nb;2,125;2\n"), stdin: b"", code: 2, words: &["line 2", "1,250", "thousands separator", "--decimal"] },
    Case { id: "infinity", what: "an infinite or NaN value", args: "fit {in}", input: Some(b"study,effect,variance\na,inf,0.01\nb,NaN,0.02\nc,0.1,0.01\n"), stdin: b"", code: 2, words: &["line 2", "finite"] },
    Case { id: "negative-variance", what: "a negative sampling variance", args: "fit {in}", input: Some(b"study,effect,variance\na,0.1,-0.01\nb,0.2,0.02\n"), stdin: b"", code: 2, words: &["line 2", "variance"] },
    Case { id: "zero-variance", what: "a sampling variance of 0", args: "fit {in}", input: Some(b"study,effect,variance\na,0.1,0\nb,0.2,0.02\n"), stdin: b"", code: 2, words: &["line 2", "variance"] },
    Case { id: "one-study", what: "a single usable study", args: "fit {in}", input: Some(b"study,effect,variance\na,0.1,0.01\n"), stdin: b"", code: 2, words: &["only one study"] },
    Case { id: "constant-moderator", what: "a moderator with the same value in every study", args: "fit {in} --moderator m", input: Some(b"study,effect,variance,m\na,0.1,0.01,5\nb,0.3,0.02,5\nc,0.2,0.01,5\n"), stdin: b"", code: 2, words: &["'m'"] },
    Case { id: "collinear-moderators", what: "one moderator a multiple of another", args: "fit {in} --moderator m --moderator m2", input: Some(b"study,effect,variance,m,m2\na,0.1,0.01,1,2\nb,0.3,0.02,2,4\nc,0.2,0.01,3,6\nd,0.25,0.01,4,8\n"), stdin: b"", code: 2, words: &["m2", "collinear"] },
    Case { id: "typo-in-numeric-moderator", what: "one text typo among numeric moderator values", args: "fit {in} --moderator m", input: Some(b"study,effect,variance,m\na,0.1,0.01,1\nb,0.3,0.02,2\nc,0.2,0.01,3O\nd,0.25,0.01,4\n"), stdin: b"", code: 2, words: &["line 4", "3O"] },
    Case { id: "unknown-moderator", what: "a moderator name that is not a column", args: "fit {in} --moderator dose", input: Some(PLAIN), stdin: b"", code: 2, words: &["dose"] },
    Case { id: "moderator-out-of-range", what: "moderator values near 1e-300", args: "fit {in} --moderator m", input: Some(b"study,effect,variance,m\na,0.1,0.01,1e-300\nb,0.3,0.02,2e-300\nc,0.2,0.01,3e-300\n"), stdin: b"", code: 2, words: &["other units"] },
    Case { id: "r-out-of-range", what: "a correlation outside [-1, 1]", args: "fit {in} --measure r", input: Some(b"study,r,n\na,1.2,50\nb,0.3,40\nc,0.2,60\n"), stdin: b"", code: 2, words: &["line 2", "'r'"] },
    Case { id: "n-too-small", what: "a correlation from 3 or fewer people", args: "fit {in} --measure r", input: Some(b"study,r,n\na,0.2,3\nb,0.3,40\nc,0.2,60\n"), stdin: b"", code: 2, words: &["line 2", "'n'"] },
    Case { id: "sd-not-positive", what: "a standard deviation of 0 in a group", args: "fit {in} --measure smd", input: Some(b"study,treat_mean,treat_sd,treat_n,ctrl_mean,ctrl_sd,ctrl_n\na,10,0,20,9,2,20\nb,11,2,25,9,2,25\n"), stdin: b"", code: 2, words: &["line 2", "treat_sd"] },
    Case { id: "events-above-n", what: "more events than people in a group", args: "fit {in} --measure log-or", input: Some(b"study,treat_events,treat_n,ctrl_events,ctrl_n\na,30,20,5,20\nb,3,25,6,25\n"), stdin: b"", code: 2, words: &["line 2", "treat_events"] },
    Case { id: "output-is-input", what: "an output path equal to the input path", args: "fit {in} --json {in}", input: Some(PLAIN), stdin: b"", code: 2, words: &["--json", "input"] },
    Case { id: "plot-extension", what: "a plot file name without .svg, .png or .pdf", args: "fit {in} --forest {dir}/forest.jpg", input: Some(PLAIN), stdin: b"", code: 2, words: &["--forest", ".svg"] },
    Case { id: "dpi-zero", what: "--dpi 0 for a PNG plot", args: "fit {in} --forest {dir}/forest.png --dpi 0", input: Some(PLAIN), stdin: b"", code: 2, words: &["--dpi", "300"] },
    Case { id: "dpi-without-png", what: "--dpi with only vector plots", args: "fit {in} --forest {dir}/forest.pdf --dpi 300", input: Some(PLAIN), stdin: b"", code: 2, words: &["--dpi", ".png"] },
    Case { id: "columns-unknown", what: "--columns names a column the file does not have", args: "fit {in} --forest {dir}/forest.svg --columns m,year", input: Some(PLAIN), stdin: b"", code: 2, words: &["--columns", "'year'", "study, effect, variance, m"] },
    Case { id: "columns-empty-name", what: "--columns with an empty name between commas", args: "fit {in} --forest {dir}/forest.svg --columns m,,m", input: Some(PLAIN), stdin: b"", code: 2, words: &["--columns", "empty"] },
    Case { id: "group-by-unknown", what: "--group-by names a column the file does not have", args: "fit {in} --forest {dir}/forest.svg --group-by country", input: Some(PLAIN), stdin: b"", code: 2, words: &["--group-by", "'country'", "none"] },
    Case { id: "sort-unknown", what: "--sort names neither a key nor a column", args: "fit {in} --forest {dir}/forest.svg --sort year", input: Some(PLAIN), stdin: b"", code: 2, words: &["--sort", "'year'", "effect, precision or input"] },
    Case { id: "font-size-zero", what: "--font-size 0", args: "fit {in} --forest {dir}/forest.svg --font-size 0", input: Some(PLAIN), stdin: b"", code: 2, words: &["--font-size", "5 to 30"] },
    Case { id: "report-extension", what: "a report file name without .html", args: "fit {in} --report {dir}/report.txt", input: Some(PLAIN), stdin: b"", code: 2, words: &["--report", ".html"] },
    Case { id: "level-out-of-range", what: "a confidence level outside (0, 1)", args: "fit {in} --level 1.5", input: Some(PLAIN), stdin: b"", code: 2, words: &["--level"] },
    Case { id: "identical-effects-kh", what: "identical effects with Knapp–Hartung tests (residual Q = 0)", args: "fit {in} --moderator m", input: Some(b"study,effect,variance,m\na,0.2,0.01,1\nb,0.2,0.02,2\nc,0.2,0.01,3\n"), stdin: b"", code: 2, words: &["--inference z"] },
    Case { id: "col-role-twice", what: "the same role given twice with --col", args: "fit {in} --col effect=variance --col effect=m", input: Some(PLAIN), stdin: b"", code: 2, words: &["given twice"] },
    Case { id: "permutations-zero", what: "--permutations 0", args: "fit {in} --moderator m --permutations 0", input: Some(PLAIN), stdin: b"", code: 2, words: &["--permutations"] },
    Case { id: "probe-unknown", what: "--probe names a moderator not in the model", args: "fit {in} --moderator m --probe dose", input: Some(PLAIN), stdin: b"", code: 2, words: &["--probe", "dose"] },
    Case { id: "reliability-out-of-range", what: "a reliability above 1", args: "fit {in} --measure r --reliability-x rxx", input: Some(b"study,r,n,rxx\na,0.2,50,1.2\nb,0.3,40,0.8\nc,0.25,60,0.7\n"), stdin: b"", code: 2, words: &["line 2", "rxx"] },
    Case { id: "cluster-id-missing", what: "an effect without a cluster id (--cluster)", args: "fit {in} --cluster lab", input: Some(b"study,lab,effect,variance\na,L1,0.1,0.01\nb,,0.3,0.02\nc,L2,0.2,0.01\nd,L2,0.25,0.01\n"), stdin: b"", code: 2, words: &["line 3", "lab"] },
    Case { id: "robust-too-few-clusters", what: "--robust with no more clusters than coefficients", args: "fit {in} --cluster lab --moderator m --robust", input: Some(b"study,lab,effect,variance,m\na,L1,0.1,0.01,1\nb,L1,0.3,0.02,2\nc,L2,0.2,0.01,3\nd,L2,0.25,0.01,4\n"), stdin: b"", code: 2, words: &["--robust", "clusters"] },
    Case { id: "robust-without-cluster", what: "--robust without --cluster", args: "fit {in} --robust", input: Some(PLAIN), stdin: b"", code: 2, words: &["--cluster"] },
    Case { id: "beyond-not-a-correlation", what: "--beyond outside (-1, 1) for correlations", args: "fit {in} --measure r --beyond 1.2", input: Some(b"study,r,n\na,0.1,50\nb,0.3,80\nc,0.2,40\n"), stdin: b"", code: 2, words: &["--beyond", "between -1 and 1"] },
    Case { id: "shrink-three-level", what: "--shrink under the three-level model", args: "fit {in} --cluster lab --shrink", input: Some(b"study,lab,effect,variance\na,L1,0.1,0.01\nb,L1,0.3,0.02\nc,L2,0.2,0.01\nd,L2,0.25,0.01\ne,L3,0.4,0.02\n"), stdin: b"", code: 2, words: &["--shrink", "--cluster"] },
    Case { id: "all-subsets-too-few-studies", what: "--all-subsets with too few studies for AICc", args: "fit {in} --moderator m --all-subsets", input: Some(b"study,effect,variance,m\na,0.1,0.01,1\nb,0.3,0.02,2\nc,0.2,0.01,3\nd,0.25,0.01,4\n"), stdin: b"", code: 2, words: &["--all-subsets", "too few"] },
    Case { id: "all-subsets-no-moderators", what: "--all-subsets without moderators", args: "fit {in} --all-subsets", input: Some(PLAIN), stdin: b"", code: 2, words: &["--all-subsets", "--moderator"] },
    Case { id: "spread-by-unknown-column", what: "a --spread-by name that is not a column", args: "fit {in} --spread-by lab", input: Some(PLAIN), stdin: b"", code: 2, words: &["lab", "--spread-by"] },
    Case { id: "spread-by-constant", what: "a spread characteristic with the same value in every study", args: "fit {in} --spread-by c", input: Some(SPREAD), stdin: b"", code: 2, words: &["'c'", "same value"] },
    Case { id: "spread-by-single-study-level", what: "a level of a spread characteristic with one study", args: "fit {in} --spread-by g", input: Some(SPREAD), stdin: b"", code: 2, words: &["level 'c'", "single study"] },
    Case { id: "spread-by-too-few-studies", what: "too few studies for the mean and spread terms", args: "fit {in} --moderator m --spread-by m", input: Some(PLAIN), stdin: b"", code: 2, words: &["too few", "at least 5"] },
    Case { id: "spread-by-estimator", what: "--spread-by with a moment estimator of τ²", args: "fit {in} --spread-by m --tau2 dl", input: Some(PLAIN), stdin: b"", code: 2, words: &["--tau2", "reml"] },
    Case { id: "spread-by-kh", what: "--spread-by with Knapp–Hartung tests", args: "fit {in} --spread-by m --inference kh", input: Some(PLAIN), stdin: b"", code: 2, words: &["--inference", "Wald z"] },
    Case { id: "spread-by-cluster", what: "--spread-by with clustered effects", args: "fit {in} --spread-by m --cluster study", input: Some(PLAIN), stdin: b"", code: 2, words: &["--cluster", "--spread-by"] },
    Case { id: "stdin-empty", what: "an empty standard input", args: "fit -", input: None, stdin: b"", code: 2, words: &["empty"] },
    Case { id: "sites-missing-id", what: "a participant row without a site id", args: "sites {in} --site site --x x --y y --out {dir}/e.csv", input: Some(b"site,x,y\ns1,1,2\n,2,3\ns1,3,5\n"), stdin: b"", code: 2, words: &["line 3", "site"] },
    Case { id: "sites-duplicate-ids", what: "a site table with the same id twice", args: "sites {in} --site site --x x --y y --info {dir}/info.csv --out {dir}/e.csv", input: Some(b"site,x,y\ns1,1,2\ns1,2,3\ns1,3,5\ns1,4,4\ns1,5,7\n"), stdin: b"", code: 2, words: &["line 3", "already has a row on line 2"] },
    Case { id: "sites-group-three-levels", what: "a group column (--effect smd) with three values", args: "sites {in} --site site --x arm --y y --effect smd --treat drug --out {dir}/e.csv", input: Some(b"site,arm,y\ns1,drug,2\ns1,placebo,3\ns1,drug,5\ns1,usual care,4\n"), stdin: b"", code: 2, words: &["--x", "more than two values", "'usual care' (line 5)"] },
    Case { id: "sites-treat-level-absent", what: "a --treat level that is not a value of x", args: "sites {in} --site site --x arm --y y --effect smd --treat Drug --out {dir}/e.csv", input: Some(b"site,arm,y\ns1,drug,2\ns1,placebo,3\ns1,drug,5\ns1,placebo,4\n"), stdin: b"", code: 2, words: &["--treat", "'Drug' is not a value", "'placebo' (line 3)"] },
    Case { id: "sites-group-labels-without-treat", what: "text group labels without --treat", args: "sites {in} --site site --x arm --y y --effect smd --out {dir}/e.csv", input: Some(b"site,arm,y\ns1,drug,2\ns1,placebo,3\ns1,drug,5\ns1,placebo,4\n"), stdin: b"", code: 2, words: &["--treat 'drug'", "0/1"] },
    Case { id: "sites-text-x-slope", what: "a text --x without --effect (one message, not one per row)", args: "sites {in} --site site --x arm --y y --out {dir}/e.csv", input: Some(b"site,arm,y\ns1,drug,2\ns1,placebo,3\ns1,drug,5\ns1,placebo,4\n"), stdin: b"", code: 2, words: &["'drug' on line 2", "code them 0/1", "--effect smd"] },
    Case { id: "sites-event-without-log-or", what: "--event without --effect log-or", args: "sites {in} --site site --x arm --y y --effect smd --treat drug --event yes --out {dir}/e.csv", input: Some(b"site,arm,y\ns1,drug,2\ns1,placebo,3\n"), stdin: b"", code: 2, words: &["--event", "--effect log-or"] },
    Case { id: "sites-binary-outcome-three-values", what: "a binary outcome (--effect log-or) with a third value", args: "sites {in} --site site --x arm --y outcome --effect log-or --event yes --out {dir}/e.csv", input: Some(b"site,arm,outcome\ns1,1,yes\ns1,0,no\ns1,1,maybe\ns1,0,no\n"), stdin: b"", code: 2, words: &["--y", "more than two values", "'maybe' (line 4)"] },
    Case { id: "sites-one-stage-one-site", what: "--one-stage on rows from one site", args: "sites {in} --site site --x x --y y --one-stage", input: Some(b"site,x,y\na,1,2\na,2,3\na,3,5\na,4,4\n"), stdin: b"", code: 2, words: &["one site ('a')", "at least two"] },
    Case { id: "sites-one-stage-too-few-sites", what: "--one-stage with w and only two sites", args: "sites {in} --site site --x x --y y --w w --one-stage", input: Some(b"site,x,w,y\na,1,3,2\na,2,1,3\na,3,4,5\na,4,2,4\na,5,5,6\nb,1,2,1\nb,2,6,3\nb,3,3,2\nb,4,5,6\nb,5,1,5\n"), stdin: b"", code: 2, words: &["2 sites is too few", "--w"] },
    Case { id: "sites-one-stage-constant-x", what: "--one-stage with a site whose x is constant", args: "sites {in} --site site --x x --y y --one-stage", input: Some(b"site,x,y\na,1,2\na,2,3\na,3,5\nb,1,1\nb,1,2\nb,1,3\nc,1,1\nc,2,3\nc,3,2\n"), stdin: b"", code: 2, words: &["site 'b'", "constant", "remove the site's rows"] },
    Case { id: "sites-one-stage-group-effect", what: "--one-stage with --effect smd", args: "sites {in} --site site --x arm --y y --effect smd --one-stage", input: Some(b"site,arm,y\ns1,1,2\ns1,0,3\n"), stdin: b"", code: 2, words: &["--one-stage", "drop --effect"] },
    Case { id: "sites-moderator-without-stage", what: "--moderator without --fit or --one-stage", args: "sites {in} --site site --x x --y y --info {dir}/info.csv --moderator m --out {dir}/e.csv", input: Some(b"site,x,y\ns1,1,2\ns1,2,3\ns1,3,5\n"), stdin: b"", code: 2, words: &["--moderator", "--fit or --one-stage"] },
    Case { id: "sites-effect-with-w", what: "--effect smd with a participant-level moderator --w", args: "sites {in} --site site --x arm --y y --w age --effect smd --out {dir}/e.csv", input: Some(b"site,arm,y,age\ns1,1,2,30\ns1,0,3,40\n"), stdin: b"", code: 2, words: &["--w", "--effect smd"] },
    Case { id: "selection-cut-outside", what: "a selection cut point outside (0, 1)", args: "fit {in} --selection 1.5", input: Some(PLAIN), stdin: b"", code: 2, words: &["--selection", "1.5", "outside (0, 1)"] },
    Case { id: "selection-cuts-unordered", what: "selection cut points out of order", args: "fit {in} --selection 0.5,0.025", input: Some(PLAIN), stdin: b"", code: 2, words: &["--selection", "must ascend", "0.025"] },
    Case { id: "selection-cut-repeated", what: "a selection cut point given twice", args: "fit {in} --selection 0.05,0.05", input: Some(PLAIN), stdin: b"", code: 2, words: &["--selection", "given twice"] },
    Case { id: "selection-empty-interval", what: "a p-value interval with no study", args: "fit {in} --selection 0.001", input: Some(PLAIN), stdin: b"", code: 2, words: &["--selection", "p < 0.001", "no study"] },
    Case { id: "selection-thin-interval", what: "a p-value interval with fewer than 3 studies", args: "fit {in} --selection 0.025", input: Some(PLAIN), stdin: b"", code: 2, words: &["--selection", "only 2 studies", "--selection-force"] },
    Case { id: "favoured-without-selection", what: "--favoured without --selection", args: "fit {in} --favoured negative", input: Some(PLAIN), stdin: b"", code: 2, words: &["--favoured", "--selection"] },
    Case { id: "plan-negative-tau2", what: "a negative τ² in a plan", args: "plan --measure r --k 20 --n 50 --tau2=-0.1 --moderator-effect 0.1 --moderator-sd 1", input: None, stdin: b"", code: 2, words: &["--tau2"] },
    Case { id: "sheet-bad-cell", what: "a bad cell in a spreadsheet whose table starts at B3 (column AB)", args: "fit {repo}/tests/data/routes/smd-routes.xlsx --measure smd --sheet shifted", input: None, stdin: b"", code: 2, words: &["cell shifted!AB18", "'ctrl_events'", "2 5"] },
    Case { id: "sheet-moderator-typo", what: "a text typo among numeric moderator values in a spreadsheet", args: "fit {repo}/tests/data/routes/cells.ods --moderator dose --sheet 'bad dose'", input: None, stdin: b"", code: 2, words: &["cell 'bad dose'!D12", "2.5O"] },
    Case { id: "sheet-unknown", what: "--sheet names no sheet of the workbook", args: "fit {repo}/tests/data/routes/smd-routes.xls --sheet nope", input: None, stdin: b"", code: 2, words: &["no sheet named 'nope'", "extraction, typos, shifted"] },
    Case { id: "sheet-on-csv", what: "--sheet with a CSV file", args: "fit {in} --sheet extraction", input: Some(PLAIN), stdin: b"", code: 2, words: &["--sheet", "not a spreadsheet"] },
    Case { id: "sheet-not-a-workbook", what: "a CSV file saved under a .xlsx name", args: "fit {in.xlsx}", input: Some(PLAIN), stdin: b"", code: 2, words: &["cannot be read as a spreadsheet"] },
    Case { id: "parquet-bad-cells", what: "a Parquet file with a null site id and text in a numeric column", args: "sites {repo}/tests/data/parquet/bad-cells.parquet --site site --x y --y x --out {dir}/e.csv", input: None, stdin: b"", code: 2, words: &["bad-cells.parquet", "row 7, column 'site'", "row 23, column 'x' (value 'abc')"] },
    Case { id: "parquet-date-column", what: "a Parquet date column given as a number", args: "sites {repo}/tests/data/parquet/bad-types.parquet --site site --x when --y y --out {dir}/e.csv", input: None, stdin: b"", code: 2, words: &["column 'when'", "Parquet type date"] },
    Case { id: "parquet-nested-column", what: "a Parquet list column given as a number", args: "sites {repo}/tests/data/parquet/bad-types.parquet --site site --x tags --y y --out {dir}/e.csv", input: None, stdin: b"", code: 2, words: &["column 'tags'", "nested"] },
    Case { id: "parquet-codec", what: "a Parquet file compressed with zstd", args: "sites {repo}/tests/data/parquet/participants-zstd.parquet --site site --x x --y y --out {dir}/e.csv", input: None, stdin: b"", code: 2, words: &["zstd", "Snappy"] },
    Case { id: "parquet-cut-short", what: "a Parquet file cut short (its footer lost)", args: "sites {in.parquet} --site site --x x --y y --out {dir}/e.csv", input: Some(PARQUET_CUT), stdin: b"", code: 2, words: &["cannot be read as Parquet", "written completely"] },
    Case { id: "parquet-not-parquet", what: "a CSV file saved under a .parquet name", args: "fit {in.parquet}", input: Some(PLAIN), stdin: b"", code: 2, words: &["cannot be read as Parquet"] },
];

/// The first 30,000 bytes of the participant-rows Parquet fixture.
const PARQUET_CUT: &[u8] = include_bytes!("../data/parquet/participants.parquet")
    .split_at(30_000)
    .0;

/// The site table of `sites-duplicate-ids`.
const INFO_DUPLICATE: &[u8] = b"site,size\ns1,10\ns1,12\n";

/// Runs one case; returns the exit code and stderr.
pub(crate) fn run(case: &Case) -> (Option<i32>, String) {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join(if case.args.contains("{in.xlsx}") {
        "input.xlsx"
    } else if case.args.contains("{in.parquet}") {
        "input.parquet"
    } else {
        "input.csv"
    });
    if let Some(bytes) = case.input {
        std::fs::write(&input, bytes).unwrap();
    }
    let root = repo("").display().to_string();
    let root = root.trim_end_matches('/').to_string();
    std::fs::write(dir.path().join("info.csv"), INFO_DUPLICATE).unwrap();
    let args: Vec<String> = split_args(case.args)
        .iter()
        .map(|a| {
            a.replace("{in.xlsx}", &input.display().to_string())
                .replace("{in.parquet}", &input.display().to_string())
                .replace("{in}", &input.display().to_string())
                .replace("{dir}", &dir.path().display().to_string())
                .replace("{repo}", &root)
        })
        .collect();
    let o = Command::cargo_bin("pondus")
        .unwrap()
        .args(&args)
        .write_stdin(case.stdin)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr).into_owned();
    // The scratch folder's name differs from run to run, the repository's
    // from machine to machine.
    let err = err
        .replace(&dir.path().display().to_string(), "DIR")
        .replace(&format!("{root}/"), "");
    (o.status.code(), err)
}

/// Splits a case's command at blanks; a part in single quotes ('bad dose')
/// is one argument, without its quotes.
fn split_args(args: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut quoted: Option<String> = None;
    for part in args.split_whitespace() {
        match quoted.as_mut() {
            Some(q) => {
                q.push(' ');
                q.push_str(part.trim_end_matches('\''));
                if part.ends_with('\'') {
                    out.push(quoted.take().unwrap_or_default());
                }
            }
            None if part.starts_with('\'') && !(part.len() > 1 && part.ends_with('\'')) => {
                quoted = Some(part.trim_start_matches('\'').to_string());
            }
            None if part.starts_with('\'') => out.push(part.trim_matches('\'').to_string()),
            None => out.push(part.to_string()),
        }
    }
    out.extend(quoted);
    out
}

/// The first line of a message, as the catalogue shows it; for a list of
/// cell problems ("N problems in the data") also the first problem.
fn first_line(err: &str) -> String {
    let mut lines = err.lines().map(str::trim).filter(|l| !l.is_empty());
    let first = lines.next().unwrap_or("").to_string();
    if first.ends_with("in the data") {
        if let Some(detail) = lines.next() {
            return format!("{first} / {detail}");
        }
    }
    first
}

const BEGIN: &str = "<!-- catalogue:begin (written by tests/integration/catalogue.rs) -->";
const END: &str = "<!-- catalogue:end -->";

fn table(rows: &[(String, &Case)]) -> String {
    let mut s = String::from("| case | bad input | exit | what the user sees (first line; for cell problems also the first cell) |\n|---|---|---|---|\n");
    for (msg, c) in rows {
        s.push_str(&format!(
            "| `{}` | {} | {} | `{}` |\n",
            c.id,
            c.what,
            c.code,
            msg.replace('|', "\\|").replace('`', "'")
        ));
    }
    s
}

#[test]
fn every_bad_input_gets_its_message_and_exit_code_and_is_documented() {
    let mut rows = Vec::new();
    let mut wrong = Vec::new();
    for case in CASES {
        let (code, err) = run(case);
        if code != Some(case.code) {
            wrong.push(format!(
                "{}: exit {code:?}, expected {}; stderr: {err}",
                case.id, case.code
            ));
        }
        if err.contains("panicked") || !err.starts_with("pondus: error: ") {
            wrong.push(format!("{}: not a plain error message: {err}", case.id));
        }
        for w in case.words {
            if !err.contains(w) {
                wrong.push(format!("{}: no '{w}' in: {err}", case.id));
            }
        }
        rows.push((first_line(&err), case));
    }
    assert!(wrong.is_empty(), "{}", wrong.join("\n"));
    let path = repo("docs/reliability.md");
    let doc = std::fs::read_to_string(&path).expect("docs/reliability.md exists");
    let (start, end) = (
        doc.find(BEGIN).expect("catalogue begin marker"),
        doc.find(END).expect("catalogue end marker"),
    );
    let fresh = table(&rows);
    if std::env::var_os("PONDUS_WRITE_CATALOGUE").is_some() {
        let new = format!("{}{BEGIN}\n{fresh}{}", &doc[..start], &doc[end..]);
        std::fs::write(&path, new).unwrap();
        return;
    }
    let current = &doc[start + BEGIN.len()..end];
    assert_eq!(
        current.trim(),
        fresh.trim(),
        "docs/reliability.md's catalogue is out of date; rewrite it with \
         PONDUS_WRITE_CATALOGUE=1 cargo test --test integration catalogue"
    );
}
