//! Shared independent references for the integration tests.

use kicktrain::molecule::Molecule;
use kicktrain::units::cm_to_rad_per_ps;

/// ⟨g(cosθ)⟩(t) of a J = 0 rotor after the kick exp(i f(cosθ)) at t = 0, built by quadrature of
/// Legendre functions (independent of the solver's representation).
pub fn ground_state_kick(mol: &Molecule, f: impl Fn(f64) -> f64, g: impl Fn(f64) -> f64, times: &[f64]) -> Vec<f64> {
    use kicktrain::basis::legendre::theta_normalized;
    use kicktrain::quadrature::gauss_legendre;
    let j_top = 120u32;
    let (x, w) = gauss_legendre(250, -1.0, 1.0);
    let th: Vec<Vec<f64>> = x.iter().map(|&xi| theta_normalized(0, j_top, xi)).collect();
    let mut c = vec![(0.0, 0.0); j_top as usize + 1];
    for (q, &xq) in x.iter().enumerate() {
        let (s, co) = f(xq).sin_cos();
        for j in 0..=j_top as usize {
            c[j].0 += w[q] * th[q][j] * co * th[q][0];
            c[j].1 += w[q] * th[q][j] * s * th[q][0];
        }
    }
    times
        .iter()
        .map(|&t| {
            let mut val = 0.0;
            for (q, &xq) in x.iter().enumerate() {
                let (mut re, mut im) = (0.0, 0.0);
                for j in 0..=j_top as usize {
                    let (s, co) = (-cm_to_rad_per_ps(mol.as_linear().unwrap().energy_cm(j as u32)) * t).sin_cos();
                    re += th[q][j] * (c[j].0 * co - c[j].1 * s);
                    im += th[q][j] * (c[j].0 * s + c[j].1 * co);
                }
                val += w[q] * g(xq) * (re * re + im * im);
            }
            val
        })
        .collect()
}
