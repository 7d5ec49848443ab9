//! Levenberg–Marquardt against the NIST Statistical Reference Datasets.
//!
//! Source of every expected value: NIST/ITL StRD, *Nonlinear Least Squares
//! Regression* (the 27 `.dat` files under `tests/data/nist/nonlinear/`,
//! public domain). Starting values (Start 1 and Start 2), certified
//! parameters and standard deviations, the residual sum of squares and
//! standard deviation, and the degrees of freedom are parsed from each file
//! at run time; each model's formula is checked against the text of its
//! file, and each analytic Jacobian against central differences.
//!
//! Accuracy is scored as the log relative error
//! `LRE = −log₁₀(|x − c| / |c|)`, capped at the 11 digits NIST certifies
//! (McCullough, "Assessing the reliability of statistical software: Part
//! II", The American Statistician 53(2), 1999, uses the same measure on
//! these sets). Run with `--nocapture` to see the table.

use std::collections::BTreeSet;
use std::f64::consts::PI;
use std::fmt::Write as _;
use std::path::PathBuf;

use diffusor_fit::solver::{LeastSquaresProblem, NonlinearFit, SolveOptions, solve};
use nalgebra::{DMatrix, DVector};

/// NIST certifies the nonlinear results to 11 significant digits.
const LRE_CAP: f64 = 11.0;

/// Starts that defeat this solver, with the reason. Listed starts are
/// printed and expected to fail; the test fails if any other start fails,
/// or if a listed one starts passing, so the list cannot go stale.
const KNOWN_FAILURES: &[(&str, usize, &str)] = &[];

/// Datasets whose stated degrees of freedom are not `n − p`. The test uses
/// `n − p` and checks that the file still disagrees.
const STATED_DOF_QUIRKS: &[(&str, &str)] = &[(
    "Rat43",
    "the file states 9 degrees of freedom, but n - p = 11 and the certified residual SD matches 11",
)];

/// Datasets whose certified residual SD and parameter SDs cannot be
/// reproduced in double precision. Their parameters are still compared; the
/// test checks that the listed quantities really do disagree, so the list
/// cannot go stale either.
const NOT_COMPARABLE: &[(&str, &str)] = &[(
    "Lanczos1",
    "certified RSS 1.4e-25 is below the rounding of the data in double precision \
     (about 4e-21 at the certified parameters), so the residual SD and the SDs \
     scaled by it cannot match; parameters are compared",
)];

/// A model `y = f(x; b)` with its gradient `∂f/∂b`, both written from the
/// formula in the NIST file.
struct Model {
    /// The formula as the file prints it (compared with whitespace removed).
    formula: &'static str,
    /// Predictor columns after `y`.
    predictors: &'static [&'static str],
    /// Nelson's model is for `log[y]`.
    log_response: bool,
    f: fn(&[f64], &[f64]) -> f64,
    grad: fn(&[f64], &[f64], &mut [f64]),
}

const X: &[&str] = &["x"];

fn model(name: &str) -> Model {
    let plain = |formula, f, grad| Model {
        formula,
        predictors: X,
        log_response: false,
        f,
        grad,
    };
    match name {
        "Misra1a" | "BoxBOD" => plain(
            "y = b1*(1-exp[-b2*x])  +  e",
            |x, b| b[0] * (1.0 - (-b[1] * x[0]).exp()),
            |x, b, g| {
                let e = (-b[1] * x[0]).exp();
                g[0] = 1.0 - e;
                g[1] = b[0] * x[0] * e;
            },
        ),
        "Chwirut1" | "Chwirut2" => plain(
            if name == "Chwirut1" {
                "y = exp[-b1*x]/(b2+b3*x)  +  e"
            } else {
                "y = exp(-b1*x)/(b2+b3*x)  +  e"
            },
            |x, b| (-b[0] * x[0]).exp() / (b[1] + b[2] * x[0]),
            |x, b, g| {
                let e = (-b[0] * x[0]).exp();
                let d = b[1] + b[2] * x[0];
                g[0] = -x[0] * e / d;
                g[1] = -e / (d * d);
                g[2] = -x[0] * e / (d * d);
            },
        ),
        "Lanczos1" | "Lanczos2" | "Lanczos3" => plain(
            "y = b1*exp(-b2*x) + b3*exp(-b4*x) + b5*exp(-b6*x)  +  e",
            |x, b| {
                (0..3)
                    .map(|k| b[2 * k] * (-b[2 * k + 1] * x[0]).exp())
                    .sum()
            },
            |x, b, g| {
                for k in 0..3 {
                    let e = (-b[2 * k + 1] * x[0]).exp();
                    g[2 * k] = e;
                    g[2 * k + 1] = -b[2 * k] * x[0] * e;
                }
            },
        ),
        "Gauss1" | "Gauss2" | "Gauss3" => plain(
            "y = b1*exp( -b2*x ) + b3*exp( -(x-b4)**2 / b5**2 ) + b6*exp( -(x-b7)**2 / b8**2 ) + e",
            |x, b| {
                let x = x[0];
                b[0] * (-b[1] * x).exp()
                    + b[2] * (-(x - b[3]).powi(2) / b[4].powi(2)).exp()
                    + b[5] * (-(x - b[6]).powi(2) / b[7].powi(2)).exp()
            },
            |x, b, g| {
                let x = x[0];
                let e = (-b[1] * x).exp();
                g[0] = e;
                g[1] = -b[0] * x * e;
                for (a, c, w) in [(2, 3, 4), (5, 6, 7)] {
                    let u = x - b[c];
                    let q = (-u * u / (b[w] * b[w])).exp();
                    g[a] = q;
                    g[c] = b[a] * q * 2.0 * u / (b[w] * b[w]);
                    g[w] = b[a] * q * 2.0 * u * u / (b[w] * b[w] * b[w]);
                }
            },
        ),
        "DanWood" => plain(
            "y  = b1*x**b2  +  e",
            |x, b| b[0] * x[0].powf(b[1]),
            |x, b, g| {
                let p = x[0].powf(b[1]);
                g[0] = p;
                g[1] = b[0] * p * x[0].ln();
            },
        ),
        "Misra1b" => plain(
            "y = b1 * (1-(1+b2*x/2)**(-2))  +  e",
            |x, b| b[0] * (1.0 - (1.0 + b[1] * x[0] / 2.0).powi(-2)),
            |x, b, g| {
                let u = 1.0 + b[1] * x[0] / 2.0;
                g[0] = 1.0 - u.powi(-2);
                g[1] = b[0] * x[0] * u.powi(-3);
            },
        ),
        "Kirby2" => plain(
            "y = (b1 + b2*x + b3*x**2) / (1 + b4*x + b5*x**2)  +  e",
            |x, b| {
                let x = x[0];
                (b[0] + b[1] * x + b[2] * x * x) / (1.0 + b[3] * x + b[4] * x * x)
            },
            |x, b, g| {
                let x = x[0];
                let num = b[0] + b[1] * x + b[2] * x * x;
                let den = 1.0 + b[3] * x + b[4] * x * x;
                g[0] = 1.0 / den;
                g[1] = x / den;
                g[2] = x * x / den;
                g[3] = -num * x / (den * den);
                g[4] = -num * x * x / (den * den);
            },
        ),
        "Hahn1" | "Thurber" => plain(
            if name == "Hahn1" {
                "y = (b1+b2*x+b3*x**2+b4*x**3) / (1+b5*x+b6*x**2+b7*x**3)  +  e"
            } else {
                "y = (b1 + b2*x + b3*x**2 + b4*x**3) / (1 + b5*x + b6*x**2 + b7*x**3)  +  e"
            },
            |x, b| {
                let x = x[0];
                let num = b[0] + x * (b[1] + x * (b[2] + x * b[3]));
                let den = 1.0 + x * (b[4] + x * (b[5] + x * b[6]));
                num / den
            },
            |x, b, g| {
                let x = x[0];
                let num = b[0] + x * (b[1] + x * (b[2] + x * b[3]));
                let den = 1.0 + x * (b[4] + x * (b[5] + x * b[6]));
                let powers = [1.0, x, x * x, x * x * x];
                for k in 0..4 {
                    g[k] = powers[k] / den;
                }
                for k in 1..4 {
                    g[3 + k] = -num * powers[k] / (den * den);
                }
            },
        ),
        "Nelson" => Model {
            formula: "log[y] = b1 - b2*x1 * exp[-b3*x2]  +  e",
            predictors: &["x1", "x2"],
            log_response: true,
            f: |x, b| b[0] - b[1] * x[0] * (-b[2] * x[1]).exp(),
            grad: |x, b, g| {
                let e = (-b[2] * x[1]).exp();
                g[0] = 1.0;
                g[1] = -x[0] * e;
                g[2] = b[1] * x[0] * x[1] * e;
            },
        },
        "MGH17" => plain(
            "y = b1 + b2*exp[-x*b4] + b3*exp[-x*b5]  +  e",
            |x, b| b[0] + b[1] * (-x[0] * b[3]).exp() + b[2] * (-x[0] * b[4]).exp(),
            |x, b, g| {
                let e4 = (-x[0] * b[3]).exp();
                let e5 = (-x[0] * b[4]).exp();
                g[0] = 1.0;
                g[1] = e4;
                g[2] = e5;
                g[3] = -b[1] * x[0] * e4;
                g[4] = -b[2] * x[0] * e5;
            },
        ),
        "Misra1c" => plain(
            "y = b1 * (1-(1+2*b2*x)**(-.5))  +  e",
            |x, b| b[0] * (1.0 - (1.0 + 2.0 * b[1] * x[0]).powf(-0.5)),
            |x, b, g| {
                let u = 1.0 + 2.0 * b[1] * x[0];
                g[0] = 1.0 - u.powf(-0.5);
                g[1] = b[0] * x[0] * u.powf(-1.5);
            },
        ),
        "Misra1d" => plain(
            "y = b1*b2*x*((1+b2*x)**(-1))  +  e",
            |x, b| b[0] * b[1] * x[0] / (1.0 + b[1] * x[0]),
            |x, b, g| {
                let u = 1.0 + b[1] * x[0];
                g[0] = b[1] * x[0] / u;
                g[1] = b[0] * x[0] / (u * u);
            },
        ),
        // NIST means the principal-value arctangent of the quotient, not a
        // two-argument (quadrant-aware) arctangent.
        "Roszman1" => plain(
            "pi = 3.141592653589793238462643383279E0 y =  b1 - b2*x - arctan[b3/(x-b4)]/pi  +  e",
            |x, b| b[0] - b[1] * x[0] - (b[2] / (x[0] - b[3])).atan() / PI,
            |x, b, g| {
                let u = x[0] - b[3];
                let s = u * u + b[2] * b[2];
                g[0] = 1.0;
                g[1] = -x[0];
                g[2] = -u / (PI * s);
                g[3] = -b[2] / (PI * s);
            },
        ),
        "ENSO" => plain(
            "y = b1 + b2*cos( 2*pi*x/12 ) + b3*sin( 2*pi*x/12 ) \
             + b5*cos( 2*pi*x/b4 ) + b6*sin( 2*pi*x/b4 ) \
             + b8*cos( 2*pi*x/b7 ) + b9*sin( 2*pi*x/b7 )  + e",
            |x, b| {
                let t = 2.0 * PI * x[0];
                b[0] + b[1] * (t / 12.0).cos()
                    + b[2] * (t / 12.0).sin()
                    + b[4] * (t / b[3]).cos()
                    + b[5] * (t / b[3]).sin()
                    + b[7] * (t / b[6]).cos()
                    + b[8] * (t / b[6]).sin()
            },
            |x, b, g| {
                let t = 2.0 * PI * x[0];
                g[0] = 1.0;
                g[1] = (t / 12.0).cos();
                g[2] = (t / 12.0).sin();
                for (period, c, s) in [(3, 4, 5), (6, 7, 8)] {
                    let theta = t / b[period];
                    let (sin, cos) = theta.sin_cos();
                    g[c] = cos;
                    g[s] = sin;
                    // dθ/dT = −t/T², so d(c·cosθ + s·sinθ)/dT = (c·sinθ − s·cosθ)·t/T².
                    g[period] = (b[c] * sin - b[s] * cos) * t / (b[period] * b[period]);
                }
            },
        ),
        "MGH09" => plain(
            "y = b1*(x**2+x*b2) / (x**2+x*b3+b4)  +  e",
            |x, b| {
                let x = x[0];
                b[0] * (x * x + x * b[1]) / (x * x + x * b[2] + b[3])
            },
            |x, b, g| {
                let x = x[0];
                let num = x * x + x * b[1];
                let den = x * x + x * b[2] + b[3];
                g[0] = num / den;
                g[1] = b[0] * x / den;
                g[2] = -b[0] * num * x / (den * den);
                g[3] = -b[0] * num / (den * den);
            },
        ),
        "Rat42" => plain(
            "y = b1 / (1+exp[b2-b3*x])  +  e",
            |x, b| b[0] / (1.0 + (b[1] - b[2] * x[0]).exp()),
            |x, b, g| {
                let e = (b[1] - b[2] * x[0]).exp();
                let u = 1.0 + e;
                g[0] = 1.0 / u;
                g[1] = -b[0] * e / (u * u);
                g[2] = b[0] * x[0] * e / (u * u);
            },
        ),
        "MGH10" => plain(
            "y = b1 * exp[b2/(x+b3)]  +  e",
            |x, b| b[0] * (b[1] / (x[0] + b[2])).exp(),
            |x, b, g| {
                let u = x[0] + b[2];
                let e = (b[1] / u).exp();
                g[0] = e;
                g[1] = b[0] * e / u;
                g[2] = -b[0] * e * b[1] / (u * u);
            },
        ),
        "Eckerle4" => plain(
            "y = (b1/b2) * exp[-0.5*((x-b3)/b2)**2]  +  e",
            |x, b| (b[0] / b[1]) * (-0.5 * ((x[0] - b[2]) / b[1]).powi(2)).exp(),
            |x, b, g| {
                let z = (x[0] - b[2]) / b[1];
                let q = (-0.5 * z * z).exp();
                g[0] = q / b[1];
                g[1] = b[0] * q * (z * z - 1.0) / (b[1] * b[1]);
                g[2] = b[0] * q * z / (b[1] * b[1]);
            },
        ),
        "Rat43" => plain(
            "y = b1 / ((1+exp[b2-b3*x])**(1/b4))  +  e",
            |x, b| b[0] / (1.0 + (b[1] - b[2] * x[0]).exp()).powf(1.0 / b[3]),
            |x, b, g| {
                let e = (b[1] - b[2] * x[0]).exp();
                let u = 1.0 + e;
                let p = u.powf(-1.0 / b[3]);
                g[0] = p;
                g[1] = -b[0] * p * e / (b[3] * u);
                g[2] = b[0] * p * e * x[0] / (b[3] * u);
                g[3] = b[0] * p * u.ln() / (b[3] * b[3]);
            },
        ),
        "Bennett5" => plain(
            "y = b1 * (b2+x)**(-1/b3)  +  e",
            |x, b| b[0] * (b[1] + x[0]).powf(-1.0 / b[2]),
            |x, b, g| {
                let w = b[1] + x[0];
                let p = w.powf(-1.0 / b[2]);
                g[0] = p;
                g[1] = -b[0] * p / (b[2] * w);
                g[2] = b[0] * p * w.ln() / (b[2] * b[2]);
            },
        ),
        other => panic!("no model for {other}"),
    }
}

const DATASETS: &[&str] = &[
    "Misra1a", "Chwirut2", "Chwirut1", "Lanczos3", "Gauss1", "Gauss2", "DanWood", "Misra1b",
    "Kirby2", "Hahn1", "Nelson", "MGH17", "Lanczos1", "Lanczos2", "Gauss3", "Misra1c", "Misra1d",
    "Roszman1", "ENSO", "MGH09", "Thurber", "BoxBOD", "Rat42", "MGH10", "Eckerle4", "Rat43",
    "Bennett5",
];

/// One NIST nonlinear dataset as stated in its file.
struct Dataset {
    name: String,
    difficulty: String,
    formula: String,
    starts: [Vec<f64>; 2],
    certified: Vec<f64>,
    certified_sd: Vec<f64>,
    residual_ss: f64,
    residual_sd: f64,
    stated_dof: usize,
    columns: Vec<String>,
    rows: Vec<Vec<f64>>,
}

fn number(token: &str) -> f64 {
    token
        .parse()
        .unwrap_or_else(|e| panic!("not a number: {token:?} ({e})"))
}

fn line_range(lines: &[&str], label: &str) -> (usize, usize) {
    let line = lines
        .iter()
        .find(|l| l.trim_start().starts_with(label) && l.contains("(lines"))
        .unwrap_or_else(|| panic!("no {label} line range"));
    let open = line.find("(lines").expect("range start") + "(lines".len();
    let close = line.find(')').expect("range end");
    let parts: Vec<&str> = line[open..close].split_whitespace().collect();
    assert_eq!(parts.len(), 3, "range {line:?}");
    let bound = |t: &str| t.parse::<usize>().expect("line number");
    (bound(parts[0]), bound(parts[2]))
}

fn parse(name: &str) -> Dataset {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data/nist/nonlinear")
        .join(format!("{name}.dat"));
    let bytes = std::fs::read(&path).expect("dataset file");
    assert!(bytes.windows(2).any(|w| w == b"\r\n"), "{name}: CRLF lost");
    let text = String::from_utf8(bytes).expect("ASCII dataset");
    let lines: Vec<&str> = text.lines().map(|l| l.trim_end_matches('\r')).collect();

    let (start_first, start_last) = line_range(&lines, "Starting Values");
    let (cert_first, cert_last) = line_range(&lines, "Certified Values");
    let (data_first, data_last) = line_range(&lines, "Data");

    let mut starts = [Vec::new(), Vec::new()];
    let mut certified = Vec::new();
    let mut certified_sd = Vec::new();
    for (k, line) in lines[start_first - 1..start_last].iter().enumerate() {
        let tokens: Vec<&str> = line.split_whitespace().collect();
        assert_eq!(tokens.len(), 6, "{name}: parameter line {line:?}");
        assert_eq!(tokens[0], format!("b{}", k + 1), "{name}: parameter order");
        assert_eq!(tokens[1], "=");
        starts[0].push(number(tokens[2]));
        starts[1].push(number(tokens[3]));
        certified.push(number(tokens[4]));
        certified_sd.push(number(tokens[5]));
    }
    let summary = |label: &str| {
        lines[cert_first - 1..cert_last]
            .iter()
            .find_map(|l| l.trim_start().strip_prefix(label))
            .map(str::trim)
            .unwrap_or_else(|| panic!("{name}: no {label}"))
    };
    let residual_ss = number(summary("Residual Sum of Squares:"));
    let residual_sd = number(summary("Residual Standard Deviation:"));
    let stated_dof: usize = summary("Degrees of Freedom:").parse().expect("dof");
    let stated_n: usize = summary("Number of Observations:").parse().expect("n");

    let columns: Vec<String> = lines[data_first - 2]
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
    assert_eq!(rows.len(), stated_n, "{name}: observation count");

    let difficulty = lines
        .iter()
        .find(|l| l.contains("Level of Difficulty"))
        .and_then(|l| l.split_whitespace().next())
        .expect("difficulty")
        .to_owned();
    // The formula: every non-empty line after "N Parameters (...)" up to the
    // starting-values heading.
    let model_start = lines
        .iter()
        .position(|l| l.contains("Parameters (b1"))
        .expect("parameter count line");
    let formula = lines[model_start + 1..]
        .iter()
        .map(|l| l.trim())
        .take_while(|l| !l.contains("Start"))
        .filter(|l| !l.is_empty())
        .collect::<Vec<_>>()
        .join(" ");

    Dataset {
        name: name.to_owned(),
        difficulty,
        formula,
        starts,
        certified,
        certified_sd,
        residual_ss,
        residual_sd,
        stated_dof,
        columns,
        rows,
    }
}

/// Residuals `yᵢ − f(xᵢ; b)` (or `log yᵢ − f` for Nelson) and their
/// Jacobian `−∂f/∂b`.
struct NistProblem<'a> {
    model: &'a Model,
    x: Vec<Vec<f64>>,
    y: Vec<f64>,
    parameters: usize,
}

impl<'a> NistProblem<'a> {
    fn new(model: &'a Model, d: &Dataset) -> Self {
        let y = d
            .rows
            .iter()
            .map(|r| if model.log_response { r[0].ln() } else { r[0] })
            .collect();
        let x = d.rows.iter().map(|r| r[1..].to_vec()).collect();
        NistProblem {
            model,
            x,
            y,
            parameters: d.certified.len(),
        }
    }
}

impl LeastSquaresProblem for NistProblem<'_> {
    fn residuals(&self, p: &DVector<f64>) -> DVector<f64> {
        let b = p.as_slice();
        DVector::from_iterator(
            self.y.len(),
            self.x
                .iter()
                .zip(&self.y)
                .map(|(x, y)| y - (self.model.f)(x, b)),
        )
    }

    fn jacobian(&self, p: &DVector<f64>) -> DMatrix<f64> {
        let b = p.as_slice();
        let mut jac = DMatrix::zeros(self.y.len(), self.parameters);
        let mut g = vec![0.0; self.parameters];
        for (i, x) in self.x.iter().enumerate() {
            (self.model.grad)(x, b, &mut g);
            for (j, gj) in g.iter().enumerate() {
                jac[(i, j)] = -gj;
            }
        }
        jac
    }
}

fn lre(estimate: f64, certified: f64) -> f64 {
    let err = if certified == 0.0 {
        estimate.abs()
    } else {
        (estimate - certified).abs() / certified.abs()
    };
    if err.is_nan() {
        0.0
    } else if err == 0.0 {
        LRE_CAP
    } else {
        (-err.log10()).clamp(0.0, LRE_CAP)
    }
}

fn min_lre(estimates: &[f64], certified: &[f64]) -> f64 {
    estimates
        .iter()
        .zip(certified)
        .map(|(e, c)| lre(*e, *c))
        .fold(LRE_CAP, f64::min)
}

/// Checks an analytic Jacobian against central differences at `p`.
fn check_jacobian(problem: &NistProblem<'_>, p: &DVector<f64>, name: &str) {
    let analytic = problem.jacobian(p);
    let n = p.len();
    let r_max = problem.residuals(p).amax();
    for j in 0..n {
        let h = 1e-6 * p[j].abs().max(1e-6);
        let mut up = p.clone();
        let mut down = p.clone();
        up[j] += h;
        down[j] -= h;
        let numeric = (problem.residuals(&up) - problem.residuals(&down)) / (2.0 * h);
        let scale = analytic.column(j).amax().max(numeric.amax());
        let diff = (analytic.column(j) - &numeric).amax();
        // Truncation error of the difference is about 1e-12 relative; the
        // rounding of the residuals, divided by 2h, sets the floor.
        let noise = 100.0 * f64::EPSILON * r_max / h;
        assert!(
            diff <= 1e-5 * scale + noise,
            "{name}: d r / d b{} disagrees with central differences ({diff:e} of {scale:e})",
            j + 1
        );
    }
}

/// What one start reached.
struct Outcome {
    params: f64,
    sds: f64,
    rsd: f64,
    rss: f64,
    fit: Option<NonlinearFit>,
    error: Option<String>,
}

fn required(difficulty: &str) -> f64 {
    // The project's target: 6 digits for NIST's lower and average
    // difficulty, 4 for higher.
    if difficulty == "Higher" { 4.0 } else { 6.0 }
}

#[test]
fn nist_nonlinear_certified_values() {
    let options = SolveOptions::default();
    let mut table = String::new();
    writeln!(
        table,
        "NIST StRD nonlinear least squares, SolveOptions::default(): LRE (digits, min over parameters)"
    )
    .unwrap();
    writeln!(
        table,
        "{:<9} {:<7} {:>3} {:>1} | {:>5} {:>5} {:>5} {:>4} {:>5} | {:>5} {:>5} {:>5} {:>4} {:>5} | stop (start 1 / start 2)",
        "dataset",
        "level",
        "n",
        "p",
        "par1",
        "sd1",
        "rsd1",
        "it1",
        "ev1",
        "par2",
        "sd2",
        "rsd2",
        "it2",
        "ev2",
    )
    .unwrap();

    let mut unexpected = Vec::new();
    let mut failed_as_listed = BTreeSet::new();
    let mut notes = Vec::new();
    for name in DATASETS {
        let d = parse(name);
        let m = model(name);
        let strip = |s: &str| s.chars().filter(|c| !c.is_whitespace()).collect::<String>();
        assert_eq!(strip(&d.formula), strip(m.formula), "{name}: model formula");
        assert_eq!(d.columns[0], "y", "{name}: response column");
        assert_eq!(d.columns[1..], *m.predictors, "{name}: predictor columns");

        let n = d.rows.len();
        let p = d.certified.len();
        let dof = n - p;
        match STATED_DOF_QUIRKS.iter().find(|(q, _)| q == name) {
            Some((_, why)) => {
                assert_ne!(d.stated_dof, dof, "{name}: DOF quirk no longer present");
                notes.push(format!("{name}: {why}"));
            }
            None => assert_eq!(d.stated_dof, dof, "{name}: stated degrees of freedom"),
        }
        let not_comparable = NOT_COMPARABLE.iter().find(|(q, _)| q == name);

        let problem = NistProblem::new(&m, &d);
        check_jacobian(&problem, &DVector::from_vec(d.starts[0].clone()), name);
        check_jacobian(&problem, &DVector::from_vec(d.certified.clone()), name);

        let need = required(&d.difficulty);
        let mut outcomes = Vec::new();
        for (k, start) in d.starts.iter().enumerate() {
            let outcome = match solve(&problem, DVector::from_vec(start.clone()), &options) {
                Ok(fit) => {
                    assert_eq!(fit.degrees_of_freedom, dof);
                    Outcome {
                        params: min_lre(&fit.parameters, &d.certified),
                        sds: min_lre(&fit.standard_errors, &d.certified_sd),
                        rsd: lre(fit.residual_standard_deviation, d.residual_sd),
                        rss: lre(fit.residual_sum_of_squares, d.residual_ss),
                        fit: Some(fit),
                        error: None,
                    }
                }
                Err(e) => Outcome {
                    params: 0.0,
                    sds: 0.0,
                    rsd: 0.0,
                    rss: 0.0,
                    fit: None,
                    error: Some(e.to_string()),
                },
            };
            let passed = match not_comparable {
                Some(_) => outcome.error.is_none() && outcome.params >= need,
                None => {
                    outcome.error.is_none()
                        && outcome.params >= need
                        && outcome.sds >= need
                        && outcome.rsd >= need
                        && outcome.rss >= need
                }
            };
            if let Some((_, why)) = not_comparable
                && outcome.error.is_none()
            {
                // The exclusion must stay justified: the certified RSD must
                // really be out of reach.
                assert!(
                    outcome.rsd < need,
                    "{name}: residual SD now matches (LRE {:.2}); remove it from NOT_COMPARABLE",
                    outcome.rsd
                );
                if k == 0 {
                    notes.push(format!("{name}: {why}"));
                }
            }
            let start_no = k + 1;
            let listed = KNOWN_FAILURES
                .iter()
                .find(|(q, s, _)| q == name && *s == start_no);
            match (passed, listed) {
                (true, None) => {}
                (false, Some((_, _, why))) => {
                    failed_as_listed.insert(format!("{name} start {start_no}: {why}"));
                }
                (true, Some(_)) => unexpected.push(format!(
                    "{name} start {start_no} now passes; remove it from KNOWN_FAILURES"
                )),
                (false, None) => unexpected.push(format!(
                    "{name} start {start_no} fails (need {need}): params {:.2}, sd {:.2}, rsd {:.2}, rss {:.2}{}",
                    outcome.params,
                    outcome.sds,
                    outcome.rsd,
                    outcome.rss,
                    outcome.error.as_deref().map(|e| format!(", error: {e}")).unwrap_or_default()
                )),
            }
            outcomes.push(outcome);
        }

        let cell = |o: &Outcome| match &o.fit {
            Some(f) => format!(
                "{:>5.2} {:>5.2} {:>5.2} {:>4} {:>5}",
                o.params, o.sds, o.rsd, f.iterations, f.residual_evaluations
            ),
            None => format!("{:>5} {:>5} {:>5} {:>4} {:>5}", "fail", "-", "-", "-", "-"),
        };
        let stop = |o: &Outcome| match (&o.fit, &o.error) {
            (Some(f), _) => format!("{:?}", f.termination),
            (None, Some(e)) => e.clone(),
            (None, None) => String::new(),
        };
        writeln!(
            table,
            "{:<9} {:<7} {:>3} {:>1} | {} | {} | {} / {}",
            d.name,
            d.difficulty,
            n,
            p,
            cell(&outcomes[0]),
            cell(&outcomes[1]),
            stop(&outcomes[0]),
            stop(&outcomes[1])
        )
        .unwrap();
    }
    writeln!(
        table,
        "(it: iterations = Jacobian evaluations of the solver; ev: residual evaluations)"
    )
    .unwrap();
    for note in &notes {
        writeln!(table, "note: {note}").unwrap();
    }
    for failure in &failed_as_listed {
        writeln!(table, "KNOWN FAILURE: {failure}").unwrap();
    }
    println!("{table}");
    assert!(unexpected.is_empty(), "{}", unexpected.join("\n"));
    assert_eq!(
        failed_as_listed.len(),
        KNOWN_FAILURES.len(),
        "every listed failure must still fail"
    );
}
