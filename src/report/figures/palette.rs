//! The colours of heldout's figures and pages.
//!
//! Series colours were picked for this project by searching sRGB for colours
//! that meet the conditions tested below. The first five, which most
//! experiments use, keep every pair apart (CIEDE2000 ≥ 15) for normal vision
//! and for simulated protanopia, deuteranopia and tritanopia (Machado,
//! Oliveira & Fernandes 2009, severity 1). Ten colours cannot all keep that
//! under the three simulations while staying dark enough for 3:1 contrast
//! (the search found no such set), so the five after them keep ≥ 15 for
//! normal vision and ≥ 9.5 under each simulation against every other series
//! colour. Every colour has at least 3:1 contrast against white (WCAG 2.1,
//! success criterion 1.4.11, non-text contrast). Figures never rely on colour
//! alone, so they stay readable in grey print and for every reader: each of
//! ten families also has its own marker shape, and training curves are
//! dashed.

use plotters::style::RGBColor;

/// Series colours, in the order families first appear in the results.
/// Families beyond ten reuse a colour (and a marker).
pub(crate) const SERIES: [RGBColor; 10] = [
    RGBColor(0x1f, 0x4e, 0x99), // harbour blue
    RGBColor(0xd0, 0x71, 0x1c), // ember orange
    RGBColor(0x9e, 0x1f, 0x3a), // claret
    RGBColor(0x3c, 0x9a, 0x8a), // lichen teal
    RGBColor(0x8a, 0x7f, 0xc0), // heather
    RGBColor(0x00, 0x74, 0x94), // fjord
    RGBColor(0x5c, 0x80, 0x54), // moss
    RGBColor(0x68, 0x68, 0x00), // olive
    RGBColor(0x84, 0x50, 0x68), // mauve
    RGBColor(0x88, 0x00, 0x6c), // berry
];

/// Squared bias in the bias–variance figure (ember orange, a series colour:
/// the figure's colours stand for quantities, and its panels name the family).
/// Claret would sit too close to ink under protanopia (tested below).
pub(crate) const BIAS: RGBColor = SERIES[1];
/// Variance in the bias–variance figure (lichen teal).
pub(crate) const VARIANCE: RGBColor = SERIES[3];

/// Text, axes and the marks of the rule (the kept setting, the threshold).
pub(crate) const INK: RGBColor = RGBColor(0x1d, 0x23, 0x2b);
/// Secondary text (axis labels, notes).
pub(crate) const MUTED: RGBColor = RGBColor(0x55, 0x5e, 0x6a);
/// Grid lines.
pub(crate) const GRID: RGBColor = RGBColor(0xe3, 0xe6, 0xea);
/// Rows shown for context only (training rows in the data figure).
pub(crate) const CONTEXT: RGBColor = RGBColor(0xa4, 0xac, 0xb6);
/// The figure background.
pub(crate) const PAPER: RGBColor = RGBColor(0xff, 0xff, 0xff);

/// The colour of the `index`-th family.
pub(crate) fn series(index: usize) -> RGBColor {
    SERIES[index % SERIES.len()]
}

#[cfg(test)]
mod tests {
    use super::*;

    /// IEC 61966-2-1 (sRGB) decoding of one 8-bit channel to linear light.
    fn linear(channel: u8) -> f64 {
        let c = f64::from(channel) / 255.0;
        if c <= 0.04045 {
            c / 12.92
        } else {
            ((c + 0.055) / 1.055).powf(2.4)
        }
    }

    fn linear_rgb(colour: RGBColor) -> [f64; 3] {
        [linear(colour.0), linear(colour.1), linear(colour.2)]
    }

    fn apply(m: &[[f64; 3]; 3], v: [f64; 3]) -> [f64; 3] {
        let row = |r: &[f64; 3]| (r[0] * v[0] + r[1] * v[1] + r[2] * v[2]).clamp(0.0, 1.0);
        [row(&m[0]), row(&m[1]), row(&m[2])]
    }

    /// Machado, Oliveira & Fernandes (2009), "A Physiologically-based Model
    /// for Simulation of Color Vision Deficiency", IEEE TVCG 15(6),
    /// pre-computed matrices for severity 1.0, applied to linear RGB (values
    /// as tabulated by the authors and the colour-science package 0.4.7).
    const PROTAN: [[f64; 3]; 3] = [
        [0.152286, 1.052583, -0.204868],
        [0.114503, 0.786281, 0.099216],
        [-0.003882, -0.048116, 1.051998],
    ];
    const DEUTAN: [[f64; 3]; 3] = [
        [0.367322, 0.860646, -0.227968],
        [0.280085, 0.672501, 0.047413],
        [-0.011820, 0.042940, 0.968881],
    ];
    const TRITAN: [[f64; 3]; 3] = [
        [1.255528, -0.076749, -0.178779],
        [-0.078411, 0.930809, 0.147602],
        [0.004733, 0.691367, 0.303900],
    ];
    const IDENTITY: [[f64; 3]; 3] = [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]];

    /// Linear sRGB to CIELAB, D65 white (IEC 61966-2-1 matrix; CIE 15:2004).
    fn lab(rgb: [f64; 3]) -> [f64; 3] {
        let [r, g, b] = rgb;
        let x = 0.4124 * r + 0.3576 * g + 0.1805 * b;
        let y = 0.2126 * r + 0.7152 * g + 0.0722 * b;
        let z = 0.0193 * r + 0.1192 * g + 0.9505 * b;
        let f = |t: f64| {
            if t > 216.0 / 24389.0 {
                t.cbrt()
            } else {
                (24389.0 / 27.0 * t + 16.0) / 116.0
            }
        };
        let (fx, fy, fz) = (f(x / 0.95047), f(y), f(z / 1.08883));
        [116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)]
    }

    /// CIEDE2000 colour difference, as written out by Sharma, Wu & Dalal
    /// (2005), "The CIEDE2000 color-difference formula: implementation notes,
    /// supplementary test data, and mathematical observations".
    fn ciede2000(one: [f64; 3], two: [f64; 3]) -> f64 {
        use std::f64::consts::PI;
        let deg = |r: f64| r * 180.0 / PI;
        let rad = |d: f64| d * PI / 180.0;
        let [l1, a1, b1] = one;
        let [l2, a2, b2] = two;
        let c_bar = ((a1 * a1 + b1 * b1).sqrt() + (a2 * a2 + b2 * b2).sqrt()) / 2.0;
        let g = 0.5 * (1.0 - (c_bar.powi(7) / (c_bar.powi(7) + 25f64.powi(7))).sqrt());
        let (a1p, a2p) = ((1.0 + g) * a1, (1.0 + g) * a2);
        let (c1p, c2p) = ((a1p * a1p + b1 * b1).sqrt(), (a2p * a2p + b2 * b2).sqrt());
        let hue = |b: f64, a: f64| {
            if a == 0.0 && b == 0.0 {
                0.0
            } else {
                deg(b.atan2(a)).rem_euclid(360.0)
            }
        };
        let (h1p, h2p) = (hue(b1, a1p), hue(b2, a2p));
        let dl = l2 - l1;
        let dc = c2p - c1p;
        let dh_angle = if c1p * c2p == 0.0 {
            0.0
        } else if (h2p - h1p).abs() <= 180.0 {
            h2p - h1p
        } else if h2p - h1p > 180.0 {
            h2p - h1p - 360.0
        } else {
            h2p - h1p + 360.0
        };
        let dh = 2.0 * (c1p * c2p).sqrt() * (rad(dh_angle) / 2.0).sin();
        let l_bar = (l1 + l2) / 2.0;
        let c_bar_p = (c1p + c2p) / 2.0;
        let h_bar = if c1p * c2p == 0.0 {
            h1p + h2p
        } else if (h1p - h2p).abs() <= 180.0 {
            (h1p + h2p) / 2.0
        } else if h1p + h2p < 360.0 {
            (h1p + h2p + 360.0) / 2.0
        } else {
            (h1p + h2p - 360.0) / 2.0
        };
        let t = 1.0 - 0.17 * rad(h_bar - 30.0).cos()
            + 0.24 * rad(2.0 * h_bar).cos()
            + 0.32 * rad(3.0 * h_bar + 6.0).cos()
            - 0.20 * rad(4.0 * h_bar - 63.0).cos();
        let d_theta = 30.0 * (-((h_bar - 275.0) / 25.0).powi(2)).exp();
        let rc = 2.0 * (c_bar_p.powi(7) / (c_bar_p.powi(7) + 25f64.powi(7))).sqrt();
        let sl = 1.0 + 0.015 * (l_bar - 50.0).powi(2) / (20.0 + (l_bar - 50.0).powi(2)).sqrt();
        let sc = 1.0 + 0.045 * c_bar_p;
        let sh = 1.0 + 0.015 * c_bar_p * t;
        let rt = -(rad(2.0 * d_theta)).sin() * rc;
        ((dl / sl).powi(2) + (dc / sc).powi(2) + (dh / sh).powi(2) + rt * (dc / sc) * (dh / sh))
            .sqrt()
    }

    #[test]
    fn ciede2000_matches_published_pairs() {
        // Sharma, Wu & Dalal (2005), Table 1, pairs 1, 4 and 25.
        let pairs = [
            ([50.0, 2.6772, -79.7751], [50.0, 0.0, -82.7485], 2.0425),
            ([50.0, -1.3802, -84.2814], [50.0, 0.0, -82.7485], 1.0000),
            (
                [60.2574, -34.0099, 36.2677],
                [60.4626, -34.1751, 39.4387],
                1.2644,
            ),
        ];
        for (one, two, expected) in pairs {
            let got = ciede2000(one, two);
            assert!((got - expected).abs() < 5e-5, "{one:?} {two:?}: {got}");
        }
    }

    /// How many series colours, from the first, keep CIEDE2000 ≥ 15 under
    /// every simulated colour vision deficiency.
    const FULLY_APART: usize = 5;

    const NORMAL: [(&str, [[f64; 3]; 3]); 1] = [("normal vision", IDENTITY)];
    const DICHROMACIES: [(&str, [[f64; 3]; 3]); 3] = [
        ("protanopia", PROTAN),
        ("deuteranopia", DEUTAN),
        ("tritanopia", TRITAN),
    ];

    /// Asserts that every pair of `colours` stays CIEDE2000 ≥ `least` apart
    /// for each of `visions`.
    fn assert_apart(colours: &[RGBColor], visions: &[(&str, [[f64; 3]; 3])], least: f64) {
        for (name, matrix) in visions {
            let seen: Vec<[f64; 3]> = colours
                .iter()
                .map(|&c| lab(apply(matrix, linear_rgb(c))))
                .collect();
            for i in 0..seen.len() {
                for j in i + 1..seen.len() {
                    let difference = ciede2000(seen[i], seen[j]);
                    assert!(
                        difference >= least,
                        "{name}: colours {:?} and {:?} only {difference:.1} apart",
                        colours[i],
                        colours[j]
                    );
                }
            }
        }
    }

    #[test]
    fn series_colours_stay_apart_under_colour_vision_deficiencies() {
        // The first five: ≥ 15 for every vision.
        let first = &SERIES[..FULLY_APART];
        assert_apart(first, &NORMAL, 15.0);
        assert_apart(first, &DICHROMACIES, 15.0);
        // All ten: ≥ 15 for normal vision, ≥ 9.5 under each dichromacy.
        assert_apart(&SERIES, &NORMAL, 15.0);
        assert_apart(&SERIES, &DICHROMACIES, 9.5);
    }

    #[test]
    fn bias_variance_colours_stay_apart_from_ink_and_the_noise_line() {
        // Expected error (ink), squared bias, variance, noise floor (muted).
        let colours = [INK, BIAS, VARIANCE, MUTED];
        assert_apart(&colours, &NORMAL, 15.0);
        assert_apart(&colours, &DICHROMACIES, 15.0);
    }

    #[test]
    fn series_colours_contrast_with_white_paper() {
        // WCAG 2.1 relative luminance and contrast ratio; 3:1 for graphics.
        let luminance = |c: RGBColor| {
            let [r, g, b] = linear_rgb(c);
            0.2126 * r + 0.7152 * g + 0.0722 * b
        };
        let white = luminance(PAPER);
        for colour in SERIES.iter().chain([&INK, &MUTED]) {
            let ratio = (white + 0.05) / (luminance(*colour) + 0.05);
            assert!(ratio >= 3.0, "{colour:?}: contrast {ratio:.2}");
        }
        // Body text colours meet the 4.5:1 of success criterion 1.4.3.
        for colour in [INK, MUTED] {
            assert!((white + 0.05) / (luminance(colour) + 0.05) >= 4.5);
        }
    }
}
