//! The shared visual style of quorum's plots: one palette, marker shapes, font sizes and
//! plot sizes, so that every SVG quorum writes looks like part of one report.
//!
//! The palette is quorum's own. It was chosen so that every pair of its colours stays
//! apart under simulated protanopia, deuteranopia and tritanopia as well as normal
//! vision (smallest CIE76 ΔE between two colours: 16.5, checked by the test below), and
//! every colour is paired with a marker shape, so a plot never relies on colour alone.
//! Engines keep one colour and marker in every plot ([`engine_index`]).
//!
//! This module is backend-neutral (plain RGB and an enum of shapes); the plotting code
//! maps it to its drawing library.

/// An sRGB colour.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Rgb(pub u8, pub u8, pub u8);

impl Rgb {
    /// `#rrggbb`.
    pub fn hex(self) -> String {
        format!("#{:02x}{:02x}{:02x}", self.0, self.1, self.2)
    }
}

/// Series colours, in order of use.
pub const PALETTE: [Rgb; 8] = [
    Rgb(0x1b, 0x4f, 0x9c), // deep blue
    Rgb(0xe3, 0x90, 0x1b), // amber
    Rgb(0x0f, 0x8f, 0x7e), // teal
    Rgb(0xc1, 0x43, 0x2e), // brick red
    Rgb(0x6f, 0xb3, 0xe6), // sky blue
    Rgb(0xa3, 0x55, 0x9a), // plum
    Rgb(0xe6, 0xa4, 0xc4), // rose
    Rgb(0x4d, 0x4d, 0x4d), // graphite
];

/// Text and axes.
pub const INK: Rgb = Rgb(0x22, 0x22, 0x22);
/// Light grid lines.
pub const GRID: Rgb = Rgb(0xe4, 0xe4, 0xe4);
/// Shaded reference bands (e.g. Bradley's band around α).
pub const BAND: Rgb = Rgb(0xd9, 0xe8, 0xd2);
/// Reference lines (e.g. the nominal α).
pub const REFERENCE: Rgb = Rgb(0x6a, 0x6a, 0x6a);

/// Marker shapes, paired with [`PALETTE`] by index.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    /// Filled circle.
    Circle,
    /// Filled triangle pointing up.
    Triangle,
    /// Filled square.
    Square,
    /// Filled diamond.
    Diamond,
    /// Open circle.
    Ring,
    /// Filled triangle pointing down.
    TriangleDown,
    /// Diagonal cross.
    Cross,
    /// Open square.
    OpenSquare,
}

/// Markers in order of use.
pub const MARKERS: [Marker; 8] = [
    Marker::Circle,
    Marker::Triangle,
    Marker::Square,
    Marker::Diamond,
    Marker::Ring,
    Marker::TriangleDown,
    Marker::Cross,
    Marker::OpenSquare,
];

/// Font family of every text element.
pub const FONT: &str = "sans-serif";
/// Title size, px.
pub const TITLE_SIZE: u32 = 18;
/// Axis label size, px.
pub const LABEL_SIZE: u32 = 14;
/// Tick label and legend size, px.
pub const TICK_SIZE: u32 = 12;
/// Default plot width, px.
pub const WIDTH: u32 = 760;
/// Default plot height, px.
pub const HEIGHT: u32 = 460;
/// Outer margin, px.
pub const MARGIN: u32 = 16;
/// Height of the x label area (tick labels and axis title), px.
pub const X_LABEL_AREA: u32 = 52;
/// Width of the y label area, px.
pub const Y_LABEL_AREA: u32 = 64;
/// Series line width, px.
pub const LINE_WIDTH: u32 = 2;
/// Marker radius, px.
pub const MARKER_SIZE: u32 = 5;

/// Report plots: title size as given to plotters, which writes `size / 1.24` px
/// (so 20 shows as about 16 px).
pub const REPORT_TITLE_SIZE: u32 = 20;
/// Report plots: axis titles and subtitles (about 13.7 px on the page).
pub const REPORT_LABEL_SIZE: u32 = 17;
/// Report plots: tick labels, legends and point labels (about 12.1 px on the page).
pub const REPORT_TICK_SIZE: u32 = 15;
/// Light fill of boxes and histogram bars.
pub const FILL: Rgb = Rgb(0xc9, 0xd6, 0xea);
/// Points inside the fences (drawn translucent over the boxes).
pub const POINT: Rgb = Rgb(0x1b, 0x4f, 0x9c);
/// Points beyond 1.5 × IQR.
pub const OUTSIDE: Rgb = Rgb(0xe3, 0x90, 0x1b);
/// Points beyond 3 × IQR and the observed statistic.
pub const FAR_OUT: Rgb = Rgb(0xc1, 0x43, 0x2e);

/// Width in px that `text` takes on the page at plotters size `size`, estimated without
/// fonts: the page size is `size / 1.24` px, an average sans-serif glyph is at most
/// 0.6 em wide for Latin text, and East Asian wide characters and emoji take a full em.
/// Deliberately generous, so that a label that passes this check fits on screen.
pub fn text_width(text: &str, size: u32) -> f64 {
    let em = f64::from(size) / 1.24;
    text.chars().map(|c| if is_wide(c) { 1.0 } else { 0.6 }).sum::<f64>() * em
}

fn is_wide(c: char) -> bool {
    matches!(u32::from(c), 0x1100..=0x115F | 0x2E80..=0xA4CF | 0xAC00..=0xD7A3 | 0xF900..=0xFAFF | 0xFE30..=0xFE4F
        | 0xFF00..=0xFF60 | 0xFFE0..=0xFFE6 | 0x1F300..=0x1FAFF | 0x20000..=0x3FFFD)
}

/// `text` shortened with an ellipsis so that [`text_width`] is at most `max_px`.
pub fn fit_text(text: &str, max_px: f64, size: u32) -> String {
    if text_width(text, size) <= max_px {
        return text.to_string();
    }
    let mut out = String::new();
    for c in text.chars() {
        out.push(c);
        if text_width(&out, size) + text_width("…", size) > max_px {
            out.pop();
            break;
        }
    }
    out.push('…');
    out
}

/// The style slot of an engine: its position in DESIGN.md's engine list, so that an
/// engine keeps its colour and marker across plots; engines not on the list share the
/// last slots in order of their id's bytes.
pub fn engine_index(id: &str) -> usize {
    const KNOWN: [&str; 8] =
        ["classical", "hc", "trimmed", "permutation", "studentized-permutation", "art", "rank-ats", "bootstrap"];
    match KNOWN.iter().position(|k| *k == id) {
        Some(i) => i,
        None => id.bytes().map(usize::from).sum::<usize>() % PALETTE.len(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn linear(c: u8) -> f64 {
        let c = c as f64 / 255.0;
        if c <= 0.04045 {
            c / 12.92
        } else {
            ((c + 0.055) / 1.055).powf(2.4)
        }
    }

    /// CIE L*a*b* (D65) of linear RGB.
    fn lab(rgb: [f64; 3]) -> [f64; 3] {
        let rgb = rgb.map(|v| v.clamp(0.0, 1.0));
        let m = [[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]];
        let white = [0.95047, 1.0, 1.08883];
        let f = |t: f64| {
            if t > (6.0f64 / 29.0).powi(3) {
                t.cbrt()
            } else {
                t / (3.0 * (6.0f64 / 29.0).powi(2)) + 4.0 / 29.0
            }
        };
        let xyz: Vec<f64> = (0..3).map(|i| (0..3).map(|j| m[i][j] * rgb[j]).sum::<f64>() / white[i]).collect();
        let (fx, fy, fz) = (f(xyz[0]), f(xyz[1]), f(xyz[2]));
        [116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)]
    }

    #[test]
    fn palette_stays_distinguishable_under_colour_vision_deficiency() {
        // Simulation matrices of Machado, Oliveira & Fernandes (2009, IEEE TVCG 15:1291–1298),
        // severity 1.0, applied to linear RGB; values from memory of the paper's table.
        let identity = [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]];
        let protan =
            [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216], [-0.003882, -0.048116, 1.051998]];
        let deutan = [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413], [-0.011820, 0.042940, 0.968881]];
        let tritan =
            [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602], [0.004733, 0.691367, 0.303900]];
        let mut worst = f64::INFINITY;
        for m in [identity, protan, deutan, tritan] {
            let labs: Vec<[f64; 3]> = PALETTE
                .iter()
                .map(|c| {
                    let l = [linear(c.0), linear(c.1), linear(c.2)];
                    lab([0, 1, 2].map(|i| (0..3).map(|j| m[i][j] * l[j]).sum()))
                })
                .collect();
            for i in 0..labs.len() {
                for j in i + 1..labs.len() {
                    let d = (0..3).map(|k| (labs[i][k] - labs[j][k]).powi(2)).sum::<f64>().sqrt();
                    worst = worst.min(d);
                }
            }
        }
        // 16.5 measured (numpy computation in the same way gave 16.53); 15 keeps a margin.
        assert!(worst > 15.0, "smallest ΔE {worst}");
    }

    #[test]
    fn engines_keep_their_slot() {
        assert_eq!(engine_index("classical"), 0);
        assert_eq!(engine_index("bootstrap"), 7);
        assert!(engine_index("some-new-engine") < PALETTE.len());
        assert_eq!(Rgb(0x1b, 0x4f, 0x9c).hex(), "#1b4f9c");
    }

    #[test]
    fn text_is_shortened_to_fit() {
        let long = "a very long level label that cannot fit";
        let short = fit_text(long, 80.0, REPORT_TICK_SIZE);
        assert!(short.ends_with('…') && text_width(&short, REPORT_TICK_SIZE) <= 80.0);
        assert_eq!(fit_text("ok", 80.0, REPORT_TICK_SIZE), "ok");
        assert!(text_width("日本", 15) > text_width("ab", 15));
    }
}
