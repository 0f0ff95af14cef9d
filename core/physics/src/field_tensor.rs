//! The sheet resistivity and conductivity tensors at one field and the inversion between
//! them: the quantities the forward models return and the field sweeps convert, kept below
//! both so that neither has to import the other.
//!
//! For an isotropic sample in a perpendicular field the tensor has two independent
//! components (rho_xx = rho_yy, rho_yx = -rho_xy), and inverting the 2x2 matrix gives
//! sigma_xx = rho_xx / (rho_xx^2 + rho_xy^2), sigma_xy = rho_xy / (rho_xx^2 + rho_xy^2) in the
//! sign convention where rho_xy and sigma_xy are positive for holes at positive field.

/// Sheet conductivity tensor at one field: sigma_xx and sigma_xy in S (S/m for a volume).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ConductivityTensor {
    pub sigma_xx_s: f64,
    /// Positive for holes at positive field.
    pub sigma_xy_s: f64,
}

/// Sheet resistivity tensor at one field: rho_xx in ohm per square, rho_xy in ohm.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ResistivityTensor {
    pub rho_xx_ohm_sq: f64,
    /// Positive for holes at positive field.
    pub rho_xy_ohm: f64,
}

/// The inverse of a tensor in the convention of this module: (a, b) -> (a, b) / (a^2 + b^2).
/// It maps (sigma_xx, sigma_xy) to (rho_xx, rho_xy) and back. Infinite or NaN when
/// a = b = 0.
pub fn invert_tensor(xx: f64, xy: f64) -> (f64, f64) {
    // Scaled to avoid overflow of the squares for extreme magnitudes.
    let scale = xx.abs().max(xy.abs());
    if scale == 0.0 || !scale.is_finite() {
        let determinant = xx * xx + xy * xy;
        return (xx / determinant, xy / determinant);
    }
    let (a, b) = (xx / scale, xy / scale);
    let determinant = (a * a + b * b) * scale;
    (a / determinant, b / determinant)
}

impl ConductivityTensor {
    pub fn to_resistivity(self) -> ResistivityTensor {
        let (rho_xx_ohm_sq, rho_xy_ohm) = invert_tensor(self.sigma_xx_s, self.sigma_xy_s);
        ResistivityTensor {
            rho_xx_ohm_sq,
            rho_xy_ohm,
        }
    }
}

impl ResistivityTensor {
    pub fn to_conductivity(self) -> ConductivityTensor {
        let (sigma_xx_s, sigma_xy_s) = invert_tensor(self.rho_xx_ohm_sq, self.rho_xy_ohm);
        ConductivityTensor { sigma_xx_s, sigma_xy_s }
    }
}
