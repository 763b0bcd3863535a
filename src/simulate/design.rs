//! The simulated data: training inputs of each replicate, test inputs, the
//! truth at them, and the noise. Every draw comes from its own named stream
//! (see [`super::random`]):
//!
//! | purpose | draws |
//! |---|---|
//! | `simulate/inputs/replicate=R/input=NAME` | replicate R's values of a random input, row by row |
//! | `simulate/inputs/input=NAME` | the same, once for all replicates (`design = "fixed"`) |
//! | `simulate/noise/replicate=R` | the training noise of replicate R, row by row |
//! | `simulate/test-points/input=NAME` | the test inputs (`test_points`), point by point |
//! | `simulate/test-noise/replicate=R` | the noise of replicate R's test targets, point by point |
//! | `simulate/split/replicate=R` | the seed of replicate R's folds |
//! | `simulate/labels/replicate=R` | class labels of replicate R's training rows, row by row |
//! | `simulate/test-labels/replicate=R` | class labels of replicate R's test points |
//!
//! A class label is 1 when the row's uniform draw u < p, the truth there
//! (the probability of label 1), and 0 otherwise. A `normal_pair` input
//! draws a uniform u first (u < ½ picks the first mean), then a normal
//! deviate.
//!
//! Replicates are numbered from 1. Grid inputs draw nothing: with g grid
//! inputs and n = m^g rows they form a full grid of m evenly spaced values
//! each (both ends exact), the first grid input varying slowest. Test points
//! draw a grid input uniformly over its range.

use nalgebra::DMatrix;

use super::random::Stream;
use crate::spec::expr::{self, Expr};
use crate::spec::simulation::{Design, InputSpec, SimulateSpec};

/// A validated `[simulate]` table, ready to draw from.
#[derive(Debug, Clone)]
pub(crate) struct Setup {
    pub(crate) seed: u64,
    pub(crate) truth: Expr,
    pub(crate) truth_text: String,
    pub(crate) target: String,
    /// Input names (the features), in column order.
    pub(crate) names: Vec<String>,
    pub(crate) inputs: Vec<InputSpec>,
    pub(crate) noise_sd: f64,
    pub(crate) train_size: usize,
    pub(crate) replicates: usize,
    pub(crate) test: TestDesign,
    /// Training inputs are the same in every replicate.
    pub(crate) fixed_design: bool,
    /// The target holds labels 0 and 1 and the truth is P(label = 1 | x).
    pub(crate) classification: bool,
}

/// Where expected error is measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum TestDesign {
    /// Points drawn once from the input distribution.
    Points(usize),
    /// Points evenly spaced over the only input's range.
    Grid(usize),
}

impl TestDesign {
    pub(crate) fn count(self) -> usize {
        match self {
            TestDesign::Points(m) | TestDesign::Grid(m) => m,
        }
    }
}

/// A point where the truth is not a finite number.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct UndefinedTruth {
    pub(crate) value: f64,
    pub(crate) at: String,
    pub(crate) place: String,
    /// The truth is a probability (classification) and left [0, 1].
    pub(crate) not_a_probability: bool,
}

impl std::fmt::Display for UndefinedTruth {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        if self.not_a_probability {
            write!(
                f,
                "the truth is {} at {} ({}), and with task = \"classification\" it is the \
                 probability of label 1, between 0 and 1; write it through a function that \
                 stays there, e.g. 1/(1 + exp(-(…)))",
                self.value, self.at, self.place
            )
        } else {
            write!(
                f,
                "the truth is {} at {} ({}); restrict the inputs' ranges so it is defined \
                 everywhere",
                self.value, self.at, self.place
            )
        }
    }
}

impl Setup {
    /// Binds a validated spec table (see [`crate::spec::simulation::validate`]).
    pub(crate) fn new(spec: &SimulateSpec, seed: u64) -> Result<Self, expr::ParseError> {
        let names = spec.input_names();
        let truth = expr::parse(&spec.truth, &names)?;
        let fixed_design = spec.design == Design::Fixed
            || spec
                .inputs
                .values()
                .all(|i| matches!(i, InputSpec::Grid(_)));
        Ok(Setup {
            seed,
            truth,
            truth_text: spec.truth.clone(),
            target: spec.target.clone(),
            inputs: spec.inputs.values().copied().collect(),
            names,
            noise_sd: spec.noise_sd(),
            train_size: spec.train_size,
            replicates: spec.replicates,
            test: match (spec.test_points, spec.test_grid) {
                (_, Some(m)) => TestDesign::Grid(m),
                (Some(m), None) => TestDesign::Points(m),
                (None, None) => TestDesign::Points(0),
            },
            fixed_design,
            classification: spec.classification(),
        })
    }

    /// Training inputs of replicate `replicate` (0-based), rows × inputs.
    pub(crate) fn training_inputs(&self, replicate: usize) -> DMatrix<f64> {
        let n = self.train_size;
        let grids: Vec<usize> = (0..self.inputs.len())
            .filter(|&j| matches!(self.inputs[j], InputSpec::Grid(_)))
            .collect();
        let side = crate::spec::simulation::grid_side(n, grids.len()).unwrap_or(n);
        let mut x = DMatrix::zeros(n, self.inputs.len());
        for (j, input) in self.inputs.iter().enumerate() {
            match input {
                InputSpec::Grid([a, b]) => {
                    // Position of this input among the grid inputs: the first varies slowest.
                    let rank = grids.iter().position(|&g| g == j).unwrap_or(0);
                    let stride = side.pow((grids.len() - 1 - rank) as u32);
                    for i in 0..n {
                        x[(i, j)] = evenly_spaced(*a, *b, side, (i / stride) % side);
                    }
                }
                InputSpec::Uniform(_) | InputSpec::Normal(_) | InputSpec::NormalPair(_) => {
                    let purpose = if self.fixed_design {
                        format!("simulate/inputs/input={}", self.names[j])
                    } else {
                        format!(
                            "simulate/inputs/replicate={}/input={}",
                            replicate + 1,
                            self.names[j]
                        )
                    };
                    let mut stream = Stream::new(self.seed, &purpose);
                    for i in 0..n {
                        x[(i, j)] = draw(input, &mut stream);
                    }
                }
            }
        }
        x
    }

    /// The test inputs, points × inputs.
    pub(crate) fn test_inputs(&self) -> DMatrix<f64> {
        match self.test {
            TestDesign::Grid(m) => {
                let [a, b] = match self.inputs[0] {
                    InputSpec::Uniform(r) | InputSpec::Grid(r) => r,
                    // Validation allows a test grid only over a bounded input.
                    InputSpec::Normal([mean, _]) | InputSpec::NormalPair([mean, _, _]) => {
                        [mean, mean]
                    }
                };
                DMatrix::from_fn(m, 1, |i, _| evenly_spaced(a, b, m, i))
            }
            TestDesign::Points(m) => {
                let mut x = DMatrix::zeros(m, self.inputs.len());
                for (j, input) in self.inputs.iter().enumerate() {
                    let purpose = format!("simulate/test-points/input={}", self.names[j]);
                    let mut stream = Stream::new(self.seed, &purpose);
                    let as_drawn = match input {
                        InputSpec::Grid(range) => InputSpec::Uniform(*range),
                        other => *other,
                    };
                    for i in 0..m {
                        x[(i, j)] = draw(&as_drawn, &mut stream);
                    }
                }
                x
            }
        }
    }

    /// The truth at every row of `x`, or the first row where it is undefined.
    pub(crate) fn truth_at(
        &self,
        x: &DMatrix<f64>,
        place: &str,
    ) -> Result<Vec<f64>, UndefinedTruth> {
        let mut point = vec![0.0; x.ncols()];
        (0..x.nrows())
            .map(|i| {
                for (j, v) in point.iter_mut().enumerate() {
                    *v = x[(i, j)];
                }
                let value = self.truth.eval(&point);
                let probability = (0.0..=1.0).contains(&value);
                if value.is_finite() && (probability || !self.classification) {
                    Ok(value)
                } else {
                    let at = self
                        .names
                        .iter()
                        .zip(&point)
                        .map(|(n, v)| format!("{n} = {v}"))
                        .collect::<Vec<_>>()
                        .join(", ");
                    Err(UndefinedTruth {
                        value,
                        at,
                        place: format!("{place}, row {}", i + 1),
                        not_a_probability: value.is_finite() && self.classification,
                    })
                }
            })
            .collect()
    }

    /// Training noise of replicate `replicate` (0-based).
    pub(crate) fn noise(&self, replicate: usize) -> Vec<f64> {
        let purpose = format!("simulate/noise/replicate={}", replicate + 1);
        Stream::new(self.seed, &purpose).normals(self.train_size, 0.0, self.noise_sd)
    }

    /// Noise of replicate `replicate`'s test targets.
    pub(crate) fn test_noise(&self, replicate: usize) -> Vec<f64> {
        let purpose = format!("simulate/test-noise/replicate={}", replicate + 1);
        Stream::new(self.seed, &purpose).normals(self.test.count(), 0.0, self.noise_sd)
    }

    /// Class labels (0 or 1) of replicate `replicate`'s training rows, where
    /// `probability` is the truth at each row.
    pub(crate) fn labels(&self, replicate: usize, probability: &[f64]) -> Vec<f64> {
        let purpose = format!("simulate/labels/replicate={}", replicate + 1);
        draw_labels(&mut Stream::new(self.seed, &purpose), probability)
    }

    /// Class labels of replicate `replicate`'s test points.
    pub(crate) fn test_labels(&self, replicate: usize, probability: &[f64]) -> Vec<f64> {
        let purpose = format!("simulate/test-labels/replicate={}", replicate + 1);
        draw_labels(&mut Stream::new(self.seed, &purpose), probability)
    }

    /// The seed of replicate `replicate`'s fold assignment.
    pub(crate) fn split_seed(&self, replicate: usize) -> u64 {
        super::random::derived_seed(
            self.seed,
            &format!("simulate/split/replicate={}", replicate + 1),
        )
    }
}

/// One label per probability: 1 when the next uniform is below it.
fn draw_labels(stream: &mut Stream, probability: &[f64]) -> Vec<f64> {
    probability
        .iter()
        .map(|&p| if stream.uniform() < p { 1.0 } else { 0.0 })
        .collect()
}

/// One draw of a random input.
fn draw(input: &InputSpec, stream: &mut Stream) -> f64 {
    match input {
        InputSpec::Uniform([a, b]) | InputSpec::Grid([a, b]) => stream.uniform_on(*a, *b),
        InputSpec::Normal([mean, sd]) => mean + sd * stream.normal(),
        InputSpec::NormalPair([first, second, sd]) => {
            let mean = if stream.uniform() < 0.5 {
                first
            } else {
                second
            };
            mean + sd * stream.normal()
        }
    }
}

/// Point `i` of `m` evenly spaced over [a, b]; both ends are exact.
pub(crate) fn evenly_spaced(a: f64, b: f64, m: usize, i: usize) -> f64 {
    if i == 0 {
        a
    } else if i + 1 >= m {
        b
    } else {
        a + (b - a) * (i as f64 / (m - 1) as f64)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    fn spec(inputs: &[(&str, InputSpec)], n: usize, design: Design) -> SimulateSpec {
        SimulateSpec {
            truth: "1".into(),
            target: "y".into(),
            inputs: inputs
                .iter()
                .map(|(n, i)| (n.to_string(), *i))
                .collect::<BTreeMap<_, _>>(),
            task: None,
            noise_sd: Some(1.0),
            noise: None,
            train_size: n,
            replicates: 3,
            test_points: Some(5),
            test_grid: None,
            design,
        }
    }

    #[test]
    fn grid_inputs_form_a_full_grid_with_exact_ends() {
        let s = spec(
            &[
                ("a", InputSpec::Grid([0.1, 0.7])),
                ("b", InputSpec::Grid([-1.0, 1.0])),
            ],
            9,
            Design::Random,
        );
        let setup = Setup::new(&s, 1).unwrap();
        assert!(setup.fixed_design);
        let x = setup.training_inputs(0);
        let a: Vec<f64> = x.column(0).iter().copied().collect();
        let b: Vec<f64> = x.column(1).iter().copied().collect();
        assert_eq!(a, [0.1, 0.1, 0.1, 0.4, 0.4, 0.4, 0.7, 0.7, 0.7]);
        assert_eq!(b, [-1.0, 0.0, 1.0, -1.0, 0.0, 1.0, -1.0, 0.0, 1.0]);
        assert_eq!(setup.training_inputs(5), x);
    }

    #[test]
    fn random_design_redraws_fixed_design_keeps() {
        let inputs = [("x", InputSpec::Uniform([0.0, 1.0]))];
        let random = Setup::new(&spec(&inputs, 4, Design::Random), 1).unwrap();
        assert_ne!(random.training_inputs(0), random.training_inputs(1));
        let fixed = Setup::new(&spec(&inputs, 4, Design::Fixed), 1).unwrap();
        assert_eq!(fixed.training_inputs(0), fixed.training_inputs(1));
        // Noise is fresh in every replicate either way.
        assert_ne!(fixed.noise(0), fixed.noise(1));
    }

    #[test]
    fn more_rows_extend_earlier_draws() {
        // Prefix property of the streams: draws depend on their position only.
        let inputs = [("x", InputSpec::Normal([2.0, 3.0]))];
        let small = Setup::new(&spec(&inputs, 5, Design::Random), 9).unwrap();
        let large = Setup::new(&spec(&inputs, 8, Design::Random), 9).unwrap();
        let (xs, xl) = (small.training_inputs(2), large.training_inputs(2));
        assert_eq!(xs.column(0).as_slice(), &xl.column(0).as_slice()[..5]);
        assert_eq!(small.noise(2)[..], large.noise(2)[..5]);
    }
}
