//! Families declared in the spec whose fitting is being built. They fail
//! before any fit with a clear message, so no number is ever produced by a
//! family that is not finished. (Removed as each family lands.)

use nalgebra::DMatrix;

use super::{Family, Setting, SettingFit};
use crate::error::FitError;

/// A declared family without a fitting algorithm yet.
#[derive(Debug, Clone)]
pub struct Pending {
    pub family: &'static str,
    pub features: Vec<String>,
}

impl Family for Pending {
    fn family(&self) -> &'static str {
        self.family
    }

    fn features(&self) -> &[String] {
        &self.features
    }

    fn settings(&self) -> Vec<Setting> {
        vec![Setting::none()]
    }

    fn fit_path(
        &self,
        _x_train: &DMatrix<f64>,
        _y_train: &[f64],
        _x_eval: &DMatrix<f64>,
        _final_fit: bool,
    ) -> Result<Vec<SettingFit>, FitError> {
        Err(FitError::NotBuilt {
            family: self.family,
        })
    }
}
