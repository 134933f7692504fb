//! The one table of named colours used by every synthesized object, and per-object jitter.
//!
//! Invariant: jitter and shading never move a colour across to another name. Jitter is at most
//! ±6% brightness and ±3% per channel; the nearest neighbours in the table (red/orange,
//! orange/yellow) differ by about 90 levels in green, far more than that.

use serde::Serialize;

use super::rng::Rng;

/// A colour name a question may answer with.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum ColourName {
    Red,
    Orange,
    Yellow,
    Green,
    Blue,
    Purple,
    White,
}

/// Every name with its sRGB base value (8 bits per channel, before shading and lighting).
///
/// | name   | sRGB           |
/// |--------|----------------|
/// | red    | (196, 34, 38)  |
/// | orange | (236, 124, 24) |
/// | yellow | (236, 206, 46) |
/// | green  | (70, 150, 52)  |
/// | blue   | (38, 84, 182)  |
/// | purple | (112, 52, 138) |
/// | white  | (238, 236, 228)|
pub const PALETTE: [(ColourName, [u8; 3]); 7] = [
    (ColourName::Red, [196, 34, 38]),
    (ColourName::Orange, [236, 124, 24]),
    (ColourName::Yellow, [236, 206, 46]),
    (ColourName::Green, [70, 150, 52]),
    (ColourName::Blue, [38, 84, 182]),
    (ColourName::Purple, [112, 52, 138]),
    (ColourName::White, [238, 236, 228]),
];

impl ColourName {
    pub const ALL: [ColourName; 7] = [
        ColourName::Red,
        ColourName::Orange,
        ColourName::Yellow,
        ColourName::Green,
        ColourName::Blue,
        ColourName::Purple,
        ColourName::White,
    ];

    pub fn as_str(self) -> &'static str {
        match self {
            ColourName::Red => "red",
            ColourName::Orange => "orange",
            ColourName::Yellow => "yellow",
            ColourName::Green => "green",
            ColourName::Blue => "blue",
            ColourName::Purple => "purple",
            ColourName::White => "white",
        }
    }

    /// The base sRGB value from [`PALETTE`], as 0–255 floats.
    pub fn base_rgb(self) -> [f64; 3] {
        let [r, g, b] = PALETTE
            .iter()
            .find(|(name, _)| *name == self)
            .map(|(_, rgb)| *rgb)
            .unwrap_or([128, 128, 128]);
        [f64::from(r), f64::from(g), f64::from(b)]
    }

    /// The base colour with a small random variation (see the module invariant).
    pub fn jittered(self, rng: &mut Rng) -> [f64; 3] {
        let brightness = rng.range(0.94, 1.06);
        let base = self.base_rgb();
        let mut out = [0.0; 3];
        for (o, b) in out.iter_mut().zip(base) {
            *o = (b * brightness * rng.range(0.97, 1.03)).clamp(0.0, 255.0);
        }
        out
    }

    /// A uniformly chosen colour other than `not`.
    pub fn other_than(not: ColourName, rng: &mut Rng) -> ColourName {
        let others: Vec<ColourName> = ColourName::ALL
            .iter()
            .copied()
            .filter(|c| *c != not)
            .collect();
        others[rng.index(others.len())]
    }

    pub fn any(rng: &mut Rng) -> ColourName {
        ColourName::ALL[rng.index(ColourName::ALL.len())]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_name_has_one_entry() {
        for c in ColourName::ALL {
            assert_eq!(PALETTE.iter().filter(|(n, _)| *n == c).count(), 1);
        }
    }

    #[test]
    fn jitter_keeps_each_colour_nearest_to_its_own_base() {
        let mut rng = Rng::new(3);
        for c in ColourName::ALL {
            for _ in 0..200 {
                let v = c.jittered(&mut rng);
                let nearest = ColourName::ALL
                    .iter()
                    .min_by(|a, b| {
                        let d = |n: &ColourName| {
                            let base = n.base_rgb();
                            (0..3).map(|i| (base[i] - v[i]).powi(2)).sum::<f64>()
                        };
                        d(a).total_cmp(&d(b))
                    })
                    .copied();
                assert_eq!(nearest, Some(c));
            }
        }
    }
}
