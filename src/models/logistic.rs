//! `logistic`: logistic regression for a class target, binary or
//! multinomial, by maximum likelihood (optionally with an L2 penalty),
//! fitted by Newton's method (iteratively reweighted least squares) with
//! step halving (McCullagh & Nelder 1989, *Generalized Linear Models*, 2nd
//! ed., §2.5 and §6.5).
//!
//! Features are standardised on the training rows (mean 0, population
//! standard deviation 1); with a `degree` grid each standardised feature
//! enters with its powers 1..degree (no interactions); bound to encoded
//! categorical features (`plan::encode`), the trailing `plain` columns (0/1
//! indicators and interaction columns) enter once, standardised, never
//! raised to powers (docs/spec.md, "Categorical features"). The first class
//! present in the training rows is the reference: the model holds one
//! intercept and one coefficient per design column for every other class,
//! P(class k | x) ∝ exp(η_k), η_reference = 0. Classes absent from the
//! training rows get probability 0 (docs/spec.md, "logistic").
//!
//! The objective is −log-likelihood + (penalty / 2) · Σ_j β_jᵀ M β_j over the
//! non-intercept coefficients β_j (one entry per non-reference class): for two
//! classes M = 1 (a penalty on the log-odds slopes); for K ≥ 3,
//! M = I − 11ᵀ/K, which equals the squared norm of the symmetric (sum-to-zero)
//! class coefficients. Newton steps solve with the Cholesky factor of the
//! Hessian, sums in row order; a step that does not lower the objective is
//! halved up to 50 times. At most 100 iterations. The iteration stops when a
//! whole step moves no coefficient by more than 10⁻¹⁰ (1 + the largest); that
//! last step is taken without evaluating the objective. Once a whole step is
//! below 10⁻⁵ of that size the next one reuses the Hessian's factor (a chord
//! step: near the optimum it converges as fast as the tolerance needs, and
//! saves forming the Hessian again).
//!
//! Without a penalty the maximum-likelihood estimate does not exist when the
//! classes are (quasi-)separated by the features: the fit then fails, naming
//! the setting, and suggests a penalty grid. It is declared when a training
//! row's linear predictor exceeds [`SEPARATION_ETA`] in size.

use nalgebra::{DMatrix, DVector};

use super::registry::{
    CategoricalUse, FamilyDef, KeyDef, KeyKind, SettingProblem, Settings, Targets, PENALTY,
};
use super::{mean_and_sd, require_spread, Family, FitRequest, Setting, SettingFit};
use crate::error::FitError;
use crate::metrics::ClassPrediction;

/// Newton iterations before a fit is declared not to converge.
const MAX_ITERATIONS: usize = 100;
/// Halvings of one Newton step before it is declared not to descend.
const MAX_HALVINGS: usize = 50;
/// A Newton step reuses the Hessian factor of the step before once whole
/// steps are below this size (relative to 1 + the largest coefficient).
const CHORD_BELOW: f64 = 1e-5;
/// A linear predictor this large (a fitted probability within e⁻³⁰ ≈ 10⁻¹³
/// of 0 or 1) on a training row marks separation in an unpenalised fit.
pub(crate) const SEPARATION_ETA: f64 = 30.0;

/// Logistic regression over a grid of degrees or penalties.
#[derive(Debug, Clone)]
pub(crate) struct Logistic {
    pub(crate) features: Vec<String>,
    /// The grid's points, each a (degree, penalty) pair.
    pub(crate) grid: Vec<(usize, f64)>,
    /// Which key labels the settings.
    pub(crate) label: Label,
    /// How many trailing `features` enter once whatever the degree
    /// (indicators and interaction columns; `registry::FamilyDef::build_plain`).
    pub(crate) plain: usize,
}

/// The key that varies along the grid, shown in ids.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Label {
    None,
    Degree,
    Penalty,
}

/// The registry entry of `logistic` (see `registry`).
pub(crate) const FAMILY: FamilyDef = FamilyDef::new(
    "logistic",
    &[
        PENALTY,
        KeyDef::new(
            "degree",
            KeyKind::Counts,
            "The degrees to compare (1 to 30).",
        ),
    ],
    build,
)
.about(
    "Logistic regression (binary or multinomial) by Newton's method; optional L2 `penalty` on \
     standardised features or `degree` grid of powers of each feature.",
)
.grid("degree = [1, 2, 3]")
.predicts(Targets::Classes)
.takes_categorical(CategoricalUse::Indicators)
.plain_columns(build_plain);

fn build(settings: &Settings, features: Vec<String>) -> Result<Box<dyn Family>, SettingProblem> {
    build_plain(settings, features, 0)
}

/// Binds the grid to `features`, whose last `plain` columns enter once.
fn build_plain(
    settings: &Settings,
    features: Vec<String>,
    plain: usize,
) -> Result<Box<dyn Family>, SettingProblem> {
    let given = |key: &str| settings.values().iter().any(|(k, _)| *k == key);
    let degrees = if given("degree") {
        Some(settings.whole_grid("degree", 1, 30)?)
    } else {
        None
    };
    let penalties = match settings.reals("penalty") {
        Some(_) => Some(settings.real_grid("penalty", 0.0)?),
        None => None,
    };
    let (grid, label) = match (degrees, penalties) {
        (None, None) => (vec![(1, 0.0)], Label::None),
        (Some(degrees), None) => (degrees.iter().map(|&d| (d, 0.0)).collect(), Label::Degree),
        (None, Some(penalties)) => (penalties.iter().map(|&p| (1, p)).collect(), Label::Penalty),
        (Some(degrees), Some(penalties)) => {
            match (degrees.as_slice(), penalties.as_slice()) {
                (&[degree], _) => (
                    penalties.iter().map(|&p| (degree, p)).collect(),
                    Label::Penalty,
                ),
                (_, &[penalty]) => (
                    degrees.iter().map(|&d| (d, penalty)).collect(),
                    Label::Degree,
                ),
                _ => return Err(SettingProblem::new(
                    "penalty",
                    "give a grid of `degree` or of `penalty`, not both; the other may hold one \
                     value"
                        .into(),
                )),
            }
        }
    };
    Ok(Box::new(Logistic {
        features,
        grid,
        label,
        plain,
    }))
}

impl Logistic {
    fn setting_label(&self, (degree, penalty): (usize, f64)) -> Setting {
        match self.label {
            Label::None => Setting::none(),
            Label::Degree => Setting::count("degree", degree),
            Label::Penalty => Setting::real("penalty", penalty),
        }
    }
}

/// The standardised design of one degree: an intercept column, then each
/// numeric feature's powers 1..degree, feature-major, then each of the last
/// `plain` features once.
struct Design {
    means: Vec<f64>,
    sds: Vec<f64>,
    degree: usize,
    plain: usize,
}

impl Design {
    fn fit(x: &DMatrix<f64>, degree: usize, plain: usize) -> Self {
        let (means, sds) = x
            .column_iter()
            .map(|c| mean_and_sd(c.iter().copied()))
            .unzip();
        Design {
            means,
            sds,
            degree,
            plain,
        }
    }

    /// Features raised to powers 1..degree.
    fn numeric(&self) -> usize {
        self.means.len() - self.plain
    }

    fn columns(&self) -> usize {
        1 + self.numeric() * self.degree + self.plain
    }

    /// Row-major design of `x`.
    fn rows(&self, x: &DMatrix<f64>) -> Vec<f64> {
        let p = self.columns();
        let numeric = self.numeric();
        let mut out = Vec::with_capacity(x.nrows() * p);
        for i in 0..x.nrows() {
            out.push(1.0);
            for j in 0..self.means.len() {
                let z = (x[(i, j)] - self.means[j]) / self.sds[j];
                let powers = if j < numeric { self.degree } else { 1 };
                let mut power = 1.0;
                for _ in 0..powers {
                    power *= z;
                    out.push(power);
                }
            }
        }
        out
    }
}

/// A fitted model on the standardised design: `beta[k]` holds the
/// coefficients of the k-th non-reference present class.
struct Fitted {
    beta: Vec<Vec<f64>>,
    effective_df: f64,
}

/// What one Newton solve needs: the design (row-major, `p` columns), the
/// training rows' class among the present ones (0 = reference), the number
/// of present classes and the penalty.
struct Problem<'a> {
    design: &'a [f64],
    p: usize,
    class: &'a [usize],
    present: usize,
    penalty: f64,
}

impl Problem<'_> {
    fn rows(&self) -> usize {
        self.class.len()
    }

    /// Linear predictors of row i for the non-reference classes.
    fn eta(&self, beta: &[Vec<f64>], i: usize, out: &mut [f64]) {
        let row = &self.design[i * self.p..(i + 1) * self.p];
        for (k, b) in beta.iter().enumerate() {
            out[k] = row.iter().zip(b).map(|(x, c)| x * c).sum();
        }
    }

    /// Penalty weight between non-reference classes a and b.
    fn penalty_weight(&self, a: usize, b: usize) -> f64 {
        let k = self.present as f64;
        let identity = if a == b { 1.0 } else { 0.0 };
        if self.present == 2 {
            identity
        } else {
            identity - 1.0 / k
        }
    }

    /// −log-likelihood + penalty term, and every row's probabilities of the
    /// non-reference classes (row-major, rows × (classes − 1)), which the
    /// derivatives at the same coefficients reuse.
    fn evaluate(&self, beta: &[Vec<f64>]) -> (f64, Vec<f64>) {
        let m = self.present - 1;
        if m == 1 {
            return self.evaluate_binary(&beta[0]);
        }
        let mut eta = vec![0.0; m];
        let mut prob = vec![0.0; self.rows() * m];
        let mut total = 0.0;
        for (i, out) in prob.chunks_exact_mut(m).enumerate() {
            self.eta(beta, i, &mut eta);
            let log_norm = softmax_with_reference(&eta, out);
            let own = match self.class[i] {
                0 => 0.0,
                c => eta[c - 1],
            };
            total += log_norm - own;
        }
        (total + self.penalty / 2.0 * self.penalty_form(beta), prob)
    }

    /// [`Self::evaluate`] for two classes. Σᵢ log(1 + e^−|ηᵢ|) is taken as the
    /// logarithm of the product of the factors over each run of
    /// [`LOG_RUN`] rows (each factor lies in (1, 2], so the product cannot
    /// overflow): one logarithm per run instead of one per row. The value
    /// only decides whether a step is taken; its rounding error (a few units
    /// in the last place per run) lies far below the decrease of any step
    /// the iteration takes before its convergence test stops it.
    fn evaluate_binary(&self, beta: &[f64]) -> (f64, Vec<f64>) {
        let p = self.p;
        let mut prob = vec![0.0; self.rows()];
        let mut total = 0.0;
        let runs = self
            .design
            .chunks(p * LOG_RUN)
            .zip(prob.chunks_mut(LOG_RUN).zip(self.class.chunks(LOG_RUN)));
        let mut etas = [0.0; LOG_RUN];
        let mut exps = [0.0; LOG_RUN];
        for (rows, (probs, classes)) in runs {
            let count = classes.len();
            for (eta, row) in etas.iter_mut().zip(rows.chunks_exact(p)) {
                *eta = row.iter().zip(beta).map(|(x, c)| x * c).sum();
            }
            // The exponentials in a loop of their own: no iteration waits
            // for another, so their long multiply-add chains overlap.
            for (t, eta) in exps.iter_mut().zip(&etas).take(count) {
                *t = exp_of_nonpositive(-eta.abs());
            }
            let mut product = 1.0;
            let mut linear = 0.0;
            for (((out, &class), &eta), &t) in probs.iter_mut().zip(classes).zip(&etas).zip(&exps) {
                // log(1 + e^η) = max(η, 0) + log(1 + e^−|η|).
                if eta > 0.0 {
                    *out = 1.0 / (1.0 + t);
                    linear += eta;
                } else {
                    *out = t / (1.0 + t);
                }
                if class == 1 {
                    linear -= eta;
                }
                product *= 1.0 + t;
            }
            total += linear + libm::log(product);
        }
        (
            total + self.penalty / 2.0 * self.penalty_form(&[beta.to_vec()]),
            prob,
        )
    }

    /// [`Self::evaluate`] at zero coefficients, where every class but the
    /// reference has probability 1 / classes and the objective is
    /// rows · log(classes): no exponential needed.
    fn at_zero(&self) -> (f64, Vec<f64>) {
        let classes = self.present as f64;
        let m = self.present - 1;
        let value = self.rows() as f64 * libm::log(classes);
        (value, vec![1.0 / classes; self.rows() * m])
    }

    /// Σ_j β_jᵀ M β_j over non-intercept columns.
    fn penalty_form(&self, beta: &[Vec<f64>]) -> f64 {
        let m = self.present - 1;
        let mut total = 0.0;
        for j in 1..self.p {
            for (a, beta_a) in beta.iter().enumerate().take(m) {
                for (b, beta_b) in beta.iter().enumerate().take(m) {
                    total += beta_a[j] * self.penalty_weight(a, b) * beta_b[j];
                }
            }
        }
        total
    }

    /// Gradient of the objective and the Hessian of its likelihood part and
    /// of the whole, indexed (class, column) → class · p + column.
    fn derivatives(
        &self,
        beta: &[Vec<f64>],
        probabilities: &[f64],
    ) -> (DVector<f64>, DMatrix<f64>, DMatrix<f64>) {
        let m = self.present - 1;
        let p = self.p;
        let size = m * p;
        let mut gradient = DVector::zeros(size);
        let upper = if m == 1 {
            self.binary_sums(probabilities, gradient.as_mut_slice())
        } else {
            self.multinomial_sums(probabilities, gradient.as_mut_slice())
        };
        let mut hessian = DMatrix::from_fn(size, size, |r, c| {
            if r <= c {
                upper[r * size + c]
            } else {
                upper[c * size + r]
            }
        });
        let likelihood = hessian.clone();
        if self.penalty > 0.0 {
            for a in 0..m {
                for b in 0..m {
                    let w = self.penalty * self.penalty_weight(a, b);
                    for j in 1..self.p {
                        gradient[a * self.p + j] += w * beta[b][j];
                        hessian[(a * self.p + j, b * self.p + j)] += w;
                    }
                }
            }
        }
        (gradient, likelihood, hessian)
    }

    /// Two classes: the gradient Σᵢ (pᵢ − yᵢ) xᵢ into `gradient`, and the
    /// upper triangle of the Hessian Σᵢ wᵢ xᵢxᵢᵀ, wᵢ = pᵢ(1 − pᵢ), row-major.
    /// Rows are taken in blocks of [`BLOCK`], copied column by column, so
    /// each Hessian entry is a dot product of two contiguous columns (one
    /// scaled by w); blocks are added in row order, so the sums do not
    /// depend on anything but the data.
    fn binary_sums(&self, probabilities: &[f64], gradient: &mut [f64]) -> Vec<f64> {
        let p = self.p;
        // Columns padded to whole tiles; padded columns and rows stay zero.
        let width = p.div_ceil(TILE_COLUMNS) * TILE_COLUMNS;
        let mut upper = vec![0.0; p * p];
        let mut columns = vec![0.0; BLOCK * width];
        let mut weighted = vec![0.0; BLOCK * width];
        let rows = self.rows();
        let mut start = 0;
        while start < rows {
            let end = (start + BLOCK).min(rows);
            if end - start < BLOCK {
                columns.iter_mut().for_each(|v| *v = 0.0);
                weighted.iter_mut().for_each(|v| *v = 0.0);
            }
            for (r, i) in (start..end).enumerate() {
                let prob = probabilities[i];
                let observed = if self.class[i] == 1 { 1.0 } else { 0.0 };
                let residual = prob - observed;
                let w = prob * (1.0 - prob);
                let row = &self.design[i * p..(i + 1) * p];
                for (j, &x) in row.iter().enumerate() {
                    gradient[j] += residual * x;
                    columns[j * BLOCK + r] = x;
                    weighted[j * BLOCK + r] = w * x;
                }
            }
            for j in (0..p).step_by(TILE_COLUMNS) {
                for l in (j..p).step_by(TILE_WEIGHTED) {
                    let tile = gram_tile(&columns[j * BLOCK..], &weighted[l * BLOCK..]);
                    for (a, sums) in tile.iter().enumerate() {
                        for (b, &sum) in sums.iter().enumerate() {
                            // Entries below the diagonal or in padding are
                            // computed with the tile and dropped.
                            if j + a <= l + b && l + b < p {
                                upper[(j + a) * p + l + b] += sum;
                            }
                        }
                    }
                }
            }
            start = end;
        }
        upper
    }

    /// Three or more classes: the gradient into `gradient` and the upper
    /// triangle of Σᵢ Wᵢ ⊗ xᵢxᵢᵀ, summed row by row into a flat row-major
    /// buffer (the inner loop runs over contiguous memory).
    fn multinomial_sums(&self, probabilities: &[f64], gradient: &mut [f64]) -> Vec<f64> {
        let m = self.present - 1;
        let p = self.p;
        let size = m * p;
        let mut upper = vec![0.0; size * size];
        for (i, prob) in probabilities.chunks_exact(m).enumerate() {
            let row = &self.design[i * p..(i + 1) * p];
            for a in 0..m {
                let observed = if self.class[i] == a + 1 { 1.0 } else { 0.0 };
                let residual = prob[a] - observed;
                for (j, &x) in row.iter().enumerate() {
                    gradient[a * p + j] += residual * x;
                }
                for b in a..m {
                    let w = if a == b {
                        prob[a] * (1.0 - prob[a])
                    } else {
                        -prob[a] * prob[b]
                    };
                    for (j, &xj) in row.iter().enumerate() {
                        let wx = w * xj;
                        let first = if a == b { j } else { 0 };
                        let start = (a * p + j) * size + b * p;
                        let target = &mut upper[start + first..start + p];
                        for (h, &xl) in target.iter_mut().zip(&row[first..]) {
                            *h += wx * xl;
                        }
                    }
                }
            }
        }
        upper
    }

    /// Newton's method with step halving from zero coefficients.
    fn solve(&self, setting: &str) -> Result<Fitted, FitError> {
        let m = self.present - 1;
        let mut beta = vec![vec![0.0; self.p]; m];
        let (mut value, mut probabilities) = self.at_zero();
        // The Cholesky factor of the last Hessian formed, and whether the
        // next step may reuse it (a chord step).
        let mut factor = None;
        let mut reuse = false;
        let mut last_step = f64::INFINITY;
        for _ in 0..MAX_ITERATIONS {
            let fresh = !reuse || factor.is_none();
            let gradient = if fresh {
                let (gradient, _, hessian) = self.derivatives(&beta, &probabilities);
                let Some(cholesky) = hessian.cholesky() else {
                    return Err(self.breakdown(setting, &beta));
                };
                factor = Some(cholesky);
                gradient
            } else {
                self.gradient(&beta, &probabilities)
            };
            let cholesky = factor.as_ref().expect("formed above");
            let step = cholesky.solve(&gradient);
            let largest_step = step.iter().fold(0.0f64, |a, s| a.max(s.abs()));
            let moved = |scale: f64| -> Vec<Vec<f64>> {
                (0..m)
                    .map(|a| {
                        (0..self.p)
                            .map(|j| beta[a][j] - scale * step[a * self.p + j])
                            .collect()
                    })
                    .collect()
            };
            let size = 1.0 + max_abs(&beta);
            let tolerance = 1e-10 * size;
            if largest_step <= tolerance {
                // Converged: the whole step moves no coefficient by more than
                // the tolerance, and the objective's change is below its own
                // rounding, so it is taken without another evaluation (the
                // Hessian one step back serves the effective df).
                return self.finish(setting, moved(1.0), &beta, &probabilities);
            }
            let mut scale = 1.0;
            let mut accepted = None;
            for _ in 0..=MAX_HALVINGS {
                let trial = moved(scale);
                let (trial_value, trial_probabilities) = self.evaluate(&trial);
                if trial_value <= value {
                    accepted = Some((trial, trial_value, trial_probabilities));
                    break;
                }
                scale /= 2.0;
            }
            let Some((trial, trial_value, trial_probabilities)) = accepted else {
                // No halving lowers the objective: at the optimum to rounding.
                return self.finish(setting, beta.clone(), &beta, &probabilities);
            };
            // The next step reuses this factor while whole steps are small
            // and each at most a tenth of the one before: near the optimum
            // the Hessian hardly moves, and a chord step still converges
            // (linearly, at a rate of about the relative change since the
            // factor was formed).
            reuse = scale == 1.0
                && largest_step <= CHORD_BELOW * size
                && (fresh || largest_step <= last_step / 10.0);
            last_step = largest_step;
            beta = trial;
            value = trial_value;
            probabilities = trial_probabilities;
            if largest_step * scale <= tolerance {
                // A halved step this small: at the optimum to rounding.
                return self.finish(setting, beta.clone(), &beta, &probabilities);
            }
        }
        if self.penalty == 0.0 && self.separated(&beta) {
            return Err(separation(setting));
        }
        Err(FitError::NotConverged {
            setting: setting.to_string(),
            method: "Newton's method for logistic regression",
            iterations: MAX_ITERATIONS,
            advice: "add a `penalty` grid, or drop collinear features",
        })
    }

    /// The fit at `beta`; the effective df of a penalised fit comes from the
    /// Hessians at `at` (where `probabilities` were computed: the last point
    /// evaluated, at most one converged step from `beta`).
    fn finish(
        &self,
        setting: &str,
        beta: Vec<Vec<f64>>,
        at: &[Vec<f64>],
        probabilities: &[f64],
    ) -> Result<Fitted, FitError> {
        if self.penalty == 0.0 && self.separated(&beta) {
            return Err(separation(setting));
        }
        // Effective df: trace of (likelihood + penalty Hessian)⁻¹ · likelihood
        // Hessian; the number of coefficients without a penalty.
        let effective_df = if self.penalty == 0.0 {
            ((self.present - 1) * self.p) as f64
        } else {
            let (_, likelihood, hessian) = self.derivatives(at, probabilities);
            match hessian.cholesky() {
                Some(c) => c.solve(&likelihood).trace(),
                None => f64::NAN,
            }
        };
        Ok(Fitted { beta, effective_df })
    }

    /// The gradient of the objective alone (for a chord step).
    fn gradient(&self, beta: &[Vec<f64>], probabilities: &[f64]) -> DVector<f64> {
        let m = self.present - 1;
        let p = self.p;
        let mut gradient = DVector::zeros(m * p);
        for (i, prob) in probabilities.chunks_exact(m).enumerate() {
            let row = &self.design[i * p..(i + 1) * p];
            for (a, &pa) in prob.iter().enumerate() {
                let observed = if self.class[i] == a + 1 { 1.0 } else { 0.0 };
                let residual = pa - observed;
                let block = &mut gradient.as_mut_slice()[a * p..(a + 1) * p];
                for (g, &x) in block.iter_mut().zip(row) {
                    *g += residual * x;
                }
            }
        }
        if self.penalty > 0.0 {
            for a in 0..m {
                for (b, beta_b) in beta.iter().enumerate() {
                    let w = self.penalty * self.penalty_weight(a, b);
                    for j in 1..p {
                        gradient[a * p + j] += w * beta_b[j];
                    }
                }
            }
        }
        gradient
    }

    fn separated(&self, beta: &[Vec<f64>]) -> bool {
        let mut eta = vec![0.0; self.present - 1];
        (0..self.rows()).any(|i| {
            self.eta(beta, i, &mut eta);
            eta.iter().any(|e| e.abs() > SEPARATION_ETA)
        })
    }

    fn breakdown(&self, setting: &str, beta: &[Vec<f64>]) -> FitError {
        if self.penalty == 0.0 && self.separated(beta) {
            separation(setting)
        } else {
            FitError::RankDeficient {
                setting: setting.to_string(),
                column: 0,
            }
        }
    }
}

fn separation(setting: &str) -> FitError {
    FitError::Separation {
        setting: setting.to_string(),
    }
}

fn max_abs(beta: &[Vec<f64>]) -> f64 {
    beta.iter().flatten().fold(0.0f64, |a, b| a.max(b.abs()))
}

/// Rows per block of the two-class Hessian sums: the block's columns and
/// weighted columns (at most 12 of each) stay in a 32 KiB level-1 cache.
const BLOCK: usize = 128;
/// Rows per logarithm of the two-class objective ([`Problem::evaluate_binary`]).
const LOG_RUN: usize = 64;
/// Design columns and weighted columns per tile of [`gram_tile`].
const TILE_COLUMNS: usize = 4;
const TILE_WEIGHTED: usize = 2;

/// The 4 × 2 tile Σᵣ `columns[a][r] · weighted[b][r]` of a block's Gram
/// matrix, a = 0..4, b = 0..2, each column [`BLOCK`] long and the next one
/// [`BLOCK`] further on. Eight sums, each in two lanes (even and odd rows)
/// added at the end, stay in registers; each loaded value serves two or four
/// products, where one dot product at a time loads two values per product.
/// The order of every addition is fixed: deterministic for given inputs.
fn gram_tile(columns: &[f64], weighted: &[f64]) -> [[f64; TILE_WEIGHTED]; TILE_COLUMNS] {
    let x: [&[f64]; TILE_COLUMNS] = std::array::from_fn(|a| &columns[a * BLOCK..(a + 1) * BLOCK]);
    let w: [&[f64]; TILE_WEIGHTED] = std::array::from_fn(|b| &weighted[b * BLOCK..(b + 1) * BLOCK]);
    let mut lanes = [[[0.0f64; 2]; TILE_WEIGHTED]; TILE_COLUMNS];
    for r in (0..BLOCK).step_by(2) {
        for a in 0..TILE_COLUMNS {
            for b in 0..TILE_WEIGHTED {
                lanes[a][b][0] += x[a][r] * w[b][r];
                lanes[a][b][1] += x[a][r + 1] * w[b][r + 1];
            }
        }
    }
    lanes.map(|row| row.map(|[even, odd]| even + odd))
}

/// e^x for x ≤ 0, within about one unit in the last place, for the Newton
/// iterations' probabilities (their exponentials are most of a fit's
/// arithmetic after the Hessian sums). Branch-free, integer-only scaling:
/// x = k·ln 2 + r with k the nearest integer to x/ln 2 (by adding 1.5·2⁵²,
/// which leaves k in the low bits) and |r| ≤ ln 2 / 2, split as fdlibm splits
/// ln 2 so that k·ln2_hi is exact (Tang 1989, "Table-driven implementation
/// of the exponential function in IEEE floating-point arithmetic", ACM
/// TOMS 15(2), without the table); e^r by its Taylor polynomial of degree
/// 13, whose truncation error (r¹⁴/14! ≤ 5·10⁻¹⁸) lies below half a unit;
/// then 2^k set in the exponent bits. Below −708 it returns e^−708 (a
/// probability of 3·10⁻³⁰⁸ instead of a smaller one, which no score can
/// tell apart). Only + and × in a fixed order: the same bits everywhere.
#[inline]
fn exp_of_nonpositive(x: f64) -> f64 {
    // 1.5 · 2⁵²: adding it rounds to an integer kept in the low bits.
    const SHIFTER: f64 = 6_755_399_441_055_744.0;
    // fdlibm's split of ln 2: the high part has 32 trailing zero bits.
    const LN2_HI: f64 = f64::from_bits(0x3fe6_2e42_fee0_0000);
    const LN2_LO: f64 = f64::from_bits(0x3dea_39ef_3579_3c76);
    let x = x.max(-708.0);
    let shifted = x * std::f64::consts::LOG2_E + SHIFTER;
    let k = shifted - SHIFTER;
    let r = (x - k * LN2_HI) - k * LN2_LO;
    // Horner from 1/13! down to 1/1!, then 1 (reciprocals rounded once).
    const INVERSE_FACTORIALS: [f64; 12] = [
        1.0 / 479_001_600.0,
        1.0 / 39_916_800.0,
        1.0 / 3_628_800.0,
        1.0 / 362_880.0,
        1.0 / 40_320.0,
        1.0 / 5_040.0,
        1.0 / 720.0,
        1.0 / 120.0,
        1.0 / 24.0,
        1.0 / 6.0,
        1.0 / 2.0,
        1.0,
    ];
    let mut p = 1.0 / 6_227_020_800.0;
    for inverse in INVERSE_FACTORIALS {
        p = p * r + inverse;
    }
    let e_r = p * r + 1.0;
    let k_bits = (shifted.to_bits() as i64) - (SHIFTER.to_bits() as i64);
    e_r * f64::from_bits(((k_bits + 1023) as u64) << 52)
}

/// log(1 + Σ exp(η_k)), with the probabilities of the non-reference classes
/// written to `probabilities`, computed stably (shifted by the largest
/// predictor).
fn softmax_with_reference(eta: &[f64], probabilities: &mut [f64]) -> f64 {
    if let [e] = eta {
        // Two classes: one exponential of −|η|, which cannot overflow;
        // log(1 + e^η) = max(η, 0) + log1p(e^−|η|).
        let t = libm::exp(-e.abs());
        let (p, log_norm) = if *e > 0.0 {
            (1.0 / (1.0 + t), e + libm::log1p(t))
        } else {
            (t / (1.0 + t), libm::log1p(t))
        };
        probabilities[0] = p;
        return log_norm;
    }
    let top = eta.iter().fold(0.0f64, |a, &e| a.max(e));
    let reference = libm::exp(-top);
    let mut sum = reference;
    for (out, &e) in probabilities.iter_mut().zip(eta) {
        *out = libm::exp(e - top);
        sum += *out;
    }
    probabilities.iter_mut().for_each(|v| *v /= sum);
    top + libm::log(sum)
}

impl Family for Logistic {
    fn settings(&self) -> Vec<Setting> {
        self.grid.iter().map(|&g| self.setting_label(g)).collect()
    }

    fn fit_grid(&self, request: &FitRequest<'_>) -> Result<Vec<SettingFit>, FitError> {
        let (x_train, y_train, x_eval, final_fit) = request.parts();
        let classes = request.classes.max(2);
        let layout = ClassPrediction { classes };
        // The classes present in the training rows, in class order.
        let mut present: Vec<usize> = y_train.iter().map(|&y| y as usize).collect();
        present.sort_unstable();
        present.dedup();
        let local: Vec<usize> = y_train
            .iter()
            .map(|&y| present.partition_point(|&c| c < y as usize))
            .collect();
        require_spread(
            &self.features,
            x_train,
            "it cannot be standardised for the logistic fit",
        )?;
        let mut fits = Vec::with_capacity(self.grid.len());
        for &(degree, penalty) in &self.grid {
            let setting = self.setting_label((degree, penalty)).to_string();
            let shown = if setting.is_empty() {
                "logistic".to_string()
            } else {
                setting
            };
            let design = Design::fit(x_train, degree, self.plain);
            let p = design.columns();
            let train_rows = design.rows(x_train);
            let fitted = if present.len() < 2 {
                // One class only: it has probability 1, nothing to estimate.
                Fitted {
                    beta: Vec::new(),
                    effective_df: 0.0,
                }
            } else {
                if x_train.nrows() < p * (present.len() - 1) && penalty == 0.0 {
                    return Err(FitError::TooFewRows {
                        setting: shown,
                        needed: p * (present.len() - 1),
                        available: x_train.nrows(),
                    });
                }
                Problem {
                    design: &train_rows,
                    p,
                    class: &local,
                    present: present.len(),
                    penalty,
                }
                .solve(&shown)?
            };
            let predict = |rows: &[f64], count: usize| -> Vec<f64> {
                let mut out = Vec::with_capacity(count * layout.width());
                let mut probabilities = vec![0.0; classes];
                let mut eta = vec![0.0; present.len().saturating_sub(1)];
                let mut others = vec![0.0; eta.len()];
                for i in 0..count {
                    let row = &rows[i * p..(i + 1) * p];
                    for (k, b) in fitted.beta.iter().enumerate() {
                        eta[k] = row.iter().zip(b).map(|(x, c)| x * c).sum();
                    }
                    softmax_with_reference(&eta, &mut others);
                    probabilities.iter_mut().for_each(|v| *v = 0.0);
                    let rest: f64 = others.iter().sum();
                    probabilities[present[0]] = 1.0 - rest;
                    for (k, &prob) in others.iter().enumerate() {
                        probabilities[present[k + 1]] = prob;
                    }
                    layout.push_argmax(&mut out, &probabilities);
                }
                out
            };
            let eval_pred = predict(&design.rows(x_eval), x_eval.nrows());
            let train_pred = if final_fit {
                predict(&train_rows, x_train.nrows())
            } else {
                Vec::new()
            };
            let coefficients =
                final_fit.then(|| self.named_coefficients(&design, &fitted, &present));
            fits.push(SettingFit {
                train_pred,
                eval_pred,
                effective_df: fitted.effective_df,
                coefficients,
            });
        }
        Ok(fits)
    }
}

impl Logistic {
    /// The coefficients of each non-reference class (named `class c: …`, c
    /// the 1-based class number): in raw units of the features at degree 1
    /// (slope = β / sd, intercept = β₀ − Σ slope · mean), on the standardised
    /// powers otherwise.
    fn named_coefficients(
        &self,
        design: &Design,
        fitted: &Fitted,
        present: &[usize],
    ) -> Vec<(String, f64)> {
        let mut out = Vec::new();
        for (k, beta) in fitted.beta.iter().enumerate() {
            let class = present[k + 1] + 1;
            if design.degree == 1 {
                let slopes: Vec<f64> = (0..self.features.len())
                    .map(|j| beta[1 + j] / design.sds[j])
                    .collect();
                let shift: f64 = slopes.iter().zip(&design.means).map(|(s, m)| s * m).sum();
                out.push((format!("class {class}: intercept"), beta[0] - shift));
                for (name, slope) in self.features.iter().zip(slopes) {
                    out.push((format!("class {class}: {name}"), slope));
                }
            } else {
                out.push((format!("class {class}: intercept"), beta[0]));
                let (numeric, plain) = self.features.split_at(design.numeric());
                for (j, name) in numeric.iter().enumerate() {
                    for d in 1..=design.degree {
                        out.push((
                            format!("class {class}: z({name})^{d}"),
                            beta[1 + j * design.degree + d - 1],
                        ));
                    }
                }
                let plain_start = 1 + numeric.len() * design.degree;
                for (k, name) in plain.iter().enumerate() {
                    out.push((format!("class {class}: z({name})"), beta[plain_start + k]));
                }
            }
        }
        out
    }
}

#[cfg(test)]
mod tests;
