//! Linear least squares against the NIST Statistical Reference Datasets.
//!
//! Source of every expected value: NIST/ITL StRD, *Linear Least Squares
//! Regression* (the `.dat` files under `tests/data/nist/linear/`, public
//! domain). Each file's certified coefficients, their standard deviations,
//! the residual standard deviation, R² and the residual sum of squares of
//! its ANOVA table are parsed from the file itself at run time.
//!
//! Accuracy is scored as the log relative error
//! `LRE = −log₁₀(|x − c| / |c|)` (or `−log₁₀|x|` when `c = 0`), capped at the
//! 15 digits NIST certifies, as in McCullough, "Assessing the reliability of
//! statistical software: Part I", The American Statistician 52(4), 1998.
//! Run with `--nocapture` to see the table.

use std::fmt::Write as _;
use std::path::PathBuf;

use diffusor_fit::linalg::{LinearFit, QrAccumulator, RSquaredKind, lstsq};
use nalgebra::{DMatrix, DVector};

/// NIST certifies the linear results to 15 significant digits.
const LRE_CAP: f64 = 15.0;

/// Required LRE for every certified quantity (the project's target).
const REQUIRED_LRE: f64 = 9.0;

/// Filip and Longley are NIST's "higher difficulty" observed sets; the
/// project's target for them is lower. Filip cannot do much better in double
/// precision whatever the solver: its design entries `x^k` are not
/// representable, and the exact rational least-squares solution of the
/// design rounded to doubles agrees with the certified values to only about
/// 7.6 (correctly rounded powers) to 7.9 (powers by repeated
/// multiplication, as built here) digits, against 14 for the exact solution
/// from the decimal data. `lstsq` reaches that 7.9.
const REQUIRED_LRE_HARDEST: &[(&str, f64)] = &[("Filip", 7.0), ("Longley", 7.0)];

const DATASETS: &[&str] = &[
    "Norris", "Pontius", "NoInt1", "NoInt2", "Filip", "Longley", "Wampler1", "Wampler2",
    "Wampler3", "Wampler4", "Wampler5",
];

/// One NIST linear dataset as stated in its file.
struct Dataset {
    name: String,
    difficulty: String,
    model: String,
    /// Parameter names in file order (`B0`, `B1`, ...).
    parameter_names: Vec<String>,
    certified: Vec<f64>,
    certified_sd: Vec<f64>,
    residual_sd: f64,
    r_squared: f64,
    residual_df: usize,
    residual_ss: f64,
    columns: Vec<String>,
    rows: Vec<Vec<f64>>,
}

fn data_path(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data/nist/linear")
        .join(format!("{name}.dat"))
}

fn number(token: &str) -> f64 {
    token
        .parse()
        .unwrap_or_else(|e| panic!("not a number: {token:?} ({e})"))
}

/// `(first, last)` of a `(lines N to M)` range on the header line that
/// starts with `label`.
fn line_range(lines: &[&str], label: &str) -> (usize, usize) {
    let line = lines
        .iter()
        .find(|l| l.trim_start().starts_with(label) && l.contains("(lines"))
        .or_else(|| {
            lines
                .iter()
                .find(|l| l.contains(label) && l.contains("(lines"))
        })
        .unwrap_or_else(|| panic!("no {label} line range"));
    let open = line.find("(lines").expect("range start") + "(lines".len();
    let close = line.find(')').expect("range end");
    let parts: Vec<&str> = line[open..close].split_whitespace().collect();
    assert_eq!(parts.len(), 3, "range {line:?}");
    let bound = |t: &str| t.parse::<usize>().expect("line number");
    (bound(parts[0]), bound(parts[2]))
}

fn parse(name: &str) -> Dataset {
    let bytes = std::fs::read(data_path(name)).expect("dataset file");
    // The copies are byte-exact: NIST's CRLF endings must have survived.
    assert!(bytes.windows(2).any(|w| w == b"\r\n"), "{name}: CRLF lost");
    let text = String::from_utf8(bytes).expect("ASCII dataset");
    let lines: Vec<&str> = text.lines().map(|l| l.trim_end_matches('\r')).collect();

    let (cert_first, cert_last) = line_range(&lines, "Certified Values");
    let (data_first, data_last) = line_range(&lines, "Data");
    let certified_block = &lines[cert_first - 1..cert_last];

    let mut parameter_names = Vec::new();
    let mut certified = Vec::new();
    let mut certified_sd = Vec::new();
    let mut residual_sd = None;
    let mut r_squared = None;
    let mut residual_anova = None;
    for line in certified_block {
        let tokens: Vec<&str> = line.split_whitespace().collect();
        match tokens.as_slice() {
            [p, est, sd] if p.starts_with('B') && p[1..].parse::<u32>().is_ok() => {
                parameter_names.push((*p).to_owned());
                certified.push(number(est));
                certified_sd.push(number(sd));
            }
            ["Standard", "Deviation", v] => residual_sd = Some(number(v)),
            ["R-Squared", v] => r_squared = Some(number(v)),
            ["Residual", df, ss, _ms] => {
                residual_anova = Some((df.parse::<usize>().expect("residual df"), number(ss)));
            }
            _ => {}
        }
    }
    let (residual_df, residual_ss) = residual_anova.expect("ANOVA residual row");

    let header = lines[data_first - 2];
    let columns: Vec<String> = header
        .trim_start()
        .strip_prefix("Data:")
        .expect("column header")
        .split_whitespace()
        .map(str::to_owned)
        .collect();
    let rows: Vec<Vec<f64>> = lines[data_first - 1..data_last]
        .iter()
        .map(|l| l.split_whitespace().map(number).collect::<Vec<f64>>())
        .collect();
    for r in &rows {
        assert_eq!(r.len(), columns.len(), "{name}: ragged data row");
    }
    assert!(
        lines[data_last..].iter().all(|l| l.trim().is_empty()),
        "{name}: data beyond the stated range"
    );

    let difficulty = lines
        .iter()
        .find(|l| l.contains("Level of Difficulty"))
        .and_then(|l| l.split_whitespace().next())
        .expect("difficulty line")
        .to_owned();
    let model = lines
        .iter()
        .map(|l| l.trim())
        .find(|l| l.starts_with("y ="))
        .expect("model formula")
        .to_owned();
    let stated_n: usize = lines
        .iter()
        .find(|l| l.trim_end().ends_with("Observations"))
        .and_then(|l| l.split_whitespace().nth(l.split_whitespace().count() - 2))
        .expect("observation count line")
        .parse()
        .expect("observation count");
    assert_eq!(stated_n, rows.len(), "{name}: observation count");

    Dataset {
        name: name.to_owned(),
        difficulty,
        model,
        parameter_names,
        certified,
        certified_sd,
        residual_sd: residual_sd.expect("residual SD"),
        r_squared: r_squared.expect("R-squared"),
        residual_df,
        residual_ss,
        columns,
        rows,
    }
}

/// The design matrix of the stated model.
///
/// Every file has the response `y` first. With one predictor `x`, parameter
/// `Bk` multiplies `x^k` (a polynomial, `B0` the intercept); with
/// predictors `x1..xk` (Longley), `Bk` multiplies `xk`. Whether the model
/// has an intercept is read from the presence of `B0`.
fn design(d: &Dataset) -> (DMatrix<f64>, DVector<f64>) {
    assert_eq!(d.columns[0], "y", "{}: response column", d.name);
    let predictors = &d.columns[1..];
    let powers: Vec<usize> = d
        .parameter_names
        .iter()
        .map(|p| p[1..].parse().expect("parameter index"))
        .collect();
    let polynomial = predictors == ["x"];
    if !polynomial {
        for (k, col) in predictors.iter().enumerate() {
            assert_eq!(*col, format!("x{}", k + 1), "{}: predictor names", d.name);
        }
    }
    // Check the formula text names the highest term the design will use,
    // so a model read the wrong way round cannot pass unnoticed.
    let model: String = d.model.chars().filter(|c| !c.is_whitespace()).collect();
    let top = *powers.last().expect("at least one parameter");
    let top_term = match (polynomial, top) {
        (true, 1) => "B1*x".to_owned(),
        (true, k) => format!("B{k}*(x**{k})"),
        (false, k) => format!("B{k}*x{k}"),
    };
    assert!(
        model.contains(&top_term),
        "{}: model {model} lacks {top_term}",
        d.name
    );
    assert_eq!(
        model.contains("B0"),
        powers[0] == 0,
        "{}: intercept",
        d.name
    );

    let n = d.rows.len();
    let x = DMatrix::from_fn(n, powers.len(), |i, j| {
        let k = powers[j];
        if k == 0 {
            1.0
        } else if polynomial {
            // Repeated multiplication, as the exact powers of the data.
            let xi = d.rows[i][1];
            (0..k).fold(1.0, |acc, _| acc * xi)
        } else {
            d.rows[i][k]
        }
    });
    let y = DVector::from_fn(n, |i, _| d.rows[i][0]);
    (x, y)
}

/// Log relative error of McCullough (1998), capped at `LRE_CAP`.
fn lre(estimate: f64, certified: f64) -> f64 {
    let err = if certified == 0.0 {
        estimate.abs()
    } else {
        (estimate - certified).abs() / certified.abs()
    };
    if err == 0.0 {
        LRE_CAP
    } else {
        (-err.log10()).clamp(0.0, LRE_CAP)
    }
}

fn min_lre(estimates: &[f64], certified: &[f64]) -> f64 {
    assert_eq!(estimates.len(), certified.len());
    estimates
        .iter()
        .zip(certified)
        .map(|(e, c)| lre(*e, *c))
        .fold(LRE_CAP, f64::min)
}

struct Scores {
    coefficients: f64,
    standard_errors: f64,
    residual_sd: f64,
    r_squared: f64,
    residual_ss: f64,
}

impl Scores {
    fn of(fit: &LinearFit, d: &Dataset) -> Self {
        Scores {
            coefficients: min_lre(&fit.coefficients, &d.certified),
            standard_errors: min_lre(&fit.standard_errors, &d.certified_sd),
            residual_sd: lre(fit.residual_standard_deviation, d.residual_sd),
            r_squared: lre(fit.r_squared.unwrap_or(f64::NAN), d.r_squared),
            residual_ss: lre(fit.residual_sum_of_squares, d.residual_ss),
        }
    }

    fn worst(&self) -> f64 {
        [
            self.coefficients,
            self.standard_errors,
            self.residual_sd,
            self.r_squared,
            self.residual_ss,
        ]
        .into_iter()
        .map(|v| if v.is_nan() { 0.0 } else { v })
        .fold(LRE_CAP, f64::min)
    }
}

#[test]
fn nist_linear_certified_values() {
    let mut table = String::new();
    writeln!(
        table,
        "NIST StRD linear least squares: LRE (digits) reached, minimum over coefficients"
    )
    .unwrap();
    writeln!(
        table,
        "{:<9} {:<8} {:>3} {:>2} {:>6} {:>6} {:>6} {:>6} {:>6} {:>9} {:>3} {:>5}",
        "dataset", "level", "n", "p", "coef", "sd", "rsd", "R2", "rss", "cond", "ref", "need"
    )
    .unwrap();
    let mut failures = Vec::new();
    for name in DATASETS {
        let d = parse(name);
        let (x, y) = design(&d);
        let fit = lstsq(&x, &y, None).unwrap_or_else(|e| panic!("{name}: {e}"));
        // NIST's ANOVA residual df is n − p for every linear set.
        assert_eq!(
            fit.degrees_of_freedom, d.residual_df,
            "{name}: degrees of freedom"
        );
        // R² is centred exactly when the model has an intercept (NIST's
        // convention for NoInt1/NoInt2).
        let expected_kind = if d.parameter_names[0] == "B0" {
            RSquaredKind::Centred
        } else {
            RSquaredKind::Uncentred
        };
        assert_eq!(fit.r_squared_kind, expected_kind, "{name}: R² kind");

        let s = Scores::of(&fit, &d);
        let need = REQUIRED_LRE_HARDEST
            .iter()
            .find(|(n, _)| n == name)
            .map_or(REQUIRED_LRE, |(_, v)| *v);
        writeln!(
            table,
            "{:<9} {:<8} {:>3} {:>2} {:>6.2} {:>6.2} {:>6.2} {:>6.2} {:>6.2} {:>9.2e} {:>3} {:>5.1}",
            d.name,
            d.difficulty,
            d.rows.len(),
            d.certified.len(),
            s.coefficients,
            s.standard_errors,
            s.residual_sd,
            s.r_squared,
            s.residual_ss,
            fit.condition_number,
            fit.refinement_steps,
            need
        )
        .unwrap();
        if s.worst() < need {
            failures.push(format!("{name}: worst LRE {:.2} < {need}", s.worst()));
        }
    }
    writeln!(
        table,
        "(cond: 1-norm condition number of the column-equilibrated design; ref: refinement sweeps)"
    )
    .unwrap();
    println!("{table}");
    assert!(
        failures.is_empty(),
        "below the required LRE:\n{}",
        failures.join("\n")
    );
}

/// The streaming accumulator must agree with `lstsq` to 12 digits on the
/// two well-conditioned NIST sets (NIST StRD Norris and Pontius), whether
/// fed in one pass or split in two halves with tiny blocks and merged.
#[test]
fn accumulator_matches_lstsq_on_norris_and_pontius() {
    for name in ["Norris", "Pontius"] {
        let d = parse(name);
        let (x, y) = design(&d);
        let reference = lstsq(&x, &y, None).unwrap();

        let mut whole = QrAccumulator::new(x.ncols());
        whole.push_rows(&x, &y, None).unwrap();
        let whole = whole.finish().unwrap();

        let half = x.nrows() / 2;
        let mut first = QrAccumulator::with_block_rows(x.ncols(), 5);
        let mut second = QrAccumulator::with_block_rows(x.ncols(), 3);
        for i in 0..x.nrows() {
            let row: Vec<f64> = x.row(i).iter().copied().collect();
            let target = if i < half { &mut first } else { &mut second };
            target.push_row(&row, y[i], 1.0).unwrap();
        }
        first.merge(second).unwrap();
        let merged = first.finish().unwrap();

        for (label, fit) in [("one pass", &whole), ("merged halves", &merged)] {
            let agree = |a: &[f64], b: &[f64]| {
                a.iter()
                    .zip(b)
                    .map(|(u, v)| lre(*u, *v))
                    .fold(LRE_CAP, f64::min)
            };
            let coef = agree(&fit.coefficients, &reference.coefficients);
            let se = agree(&fit.standard_errors, &reference.standard_errors);
            let rsd = lre(
                fit.residual_standard_deviation,
                reference.residual_standard_deviation,
            );
            let r2 = lre(fit.r_squared.unwrap(), reference.r_squared.unwrap());
            println!(
                "accumulator vs lstsq, {name} ({label}): coef {coef:.2}, sd {se:.2}, rsd {rsd:.2}, R2 {r2:.2} digits"
            );
            assert!(
                coef >= 12.0 && se >= 12.0 && rsd >= 12.0 && r2 >= 12.0,
                "{name} ({label}): agreement below 12 digits"
            );
            assert_eq!(fit.observations, d.rows.len());
            assert_eq!(fit.degrees_of_freedom, d.residual_df);
            // And against NIST directly, at the same bar as lstsq.
            let s = Scores::of(fit, &d);
            assert!(
                s.worst() >= REQUIRED_LRE,
                "{name} ({label}): worst LRE {:.2}",
                s.worst()
            );
        }
    }
}
