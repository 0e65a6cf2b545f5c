//! Parameter grids: axes `KEY=START:STOP:COUNT`, row-major order with the
//! last axis fastest.

use super::SweepError;
use crate::case::{Case, CaseKey};

/// One axis of a grid: a case key (or several keys moved together, joined
/// by `+`) and its evenly spaced values.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Axis {
    /// The keys set to each value (usually one).
    pub keys: Vec<CaseKey>,
    /// First value.
    pub start: f64,
    /// Last value.
    pub stop: f64,
    /// Number of values (≥ 1).
    pub count: usize,
}

impl Axis {
    /// Parse `KEY=START:STOP:COUNT`; `KEY` may be `KEY1+KEY2` to set several
    /// keys to the same value (for example both lead Fermi levels). An
    /// unknown key is an error that lists close matches.
    pub fn parse(spec: &str) -> Result<Axis, SweepError> {
        Axis::parse_with(spec, |k| k.parse::<CaseKey>().map_err(|e| e.to_string()))
    }

    /// [`Axis::parse`] with the key names read by `read_key`, whose error text
    /// becomes the reason of the error (the command line lists the keys of
    /// the case there).
    pub fn parse_with(
        spec: &str,
        read_key: impl Fn(&str) -> Result<CaseKey, String>,
    ) -> Result<Axis, SweepError> {
        let bad = |why: &str| SweepError::BadAxis {
            spec: spec.to_string(),
            reason: why.to_string(),
        };
        let (key, range) = spec
            .split_once('=')
            .ok_or_else(|| bad("expected KEY=START:STOP:COUNT, found no `=`"))?;
        let names: Vec<&str> = key.split('+').map(str::trim).collect();
        if names.iter().any(|k| k.is_empty()) {
            return Err(bad("expected a case key before `=`, found an empty key"));
        }
        let parts: Vec<&str> = range.split(':').collect();
        if parts.len() != 3 {
            return Err(bad(&format!(
                "expected START:STOP:COUNT, found {} field(s)",
                parts.len()
            )));
        }
        let num = |s: &str, what: &str| -> Result<f64, SweepError> {
            s.trim()
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| bad(&format!("expected a finite number for {what}, found `{s}`")))
        };
        let start = num(parts[0], "START")?;
        let stop = num(parts[1], "STOP")?;
        let count: usize = parts[2]
            .trim()
            .parse()
            .ok()
            .filter(|&c| c >= 1)
            .ok_or_else(|| {
                bad(&format!(
                    "expected a whole number ≥ 1 for COUNT, found `{}`",
                    parts[2]
                ))
            })?;
        if count == 1 && start != stop {
            return Err(bad("COUNT = 1 needs START = STOP"));
        }
        let keys = names
            .iter()
            .map(|k| read_key(k).map_err(|reason| bad(&reason)))
            .collect::<Result<Vec<_>, _>>()?;
        Ok(Axis {
            keys,
            start,
            stop,
            count,
        })
    }

    /// Column name: the key, or the keys joined by `+`.
    pub fn name(&self) -> String {
        self.keys
            .iter()
            .map(CaseKey::to_string)
            .collect::<Vec<_>>()
            .join("+")
    }

    /// The i-th value: (start (n − i) + stop i)/n with n = count − 1, the end
    /// points exact (symmetric grids come out symmetric), the points between
    /// rounded to 12 significant digits of the larger end point so that a
    /// grid over decimal end points holds the decimals a person would write
    /// (0.03, not 0.030000000000000002).
    pub fn value(&self, i: usize) -> f64 {
        if self.count == 1 || i == 0 {
            self.start
        } else if i + 1 == self.count {
            self.stop
        } else {
            let n = (self.count - 1) as f64;
            let t = i as f64;
            let v = (self.start * (n - t) + self.stop * t) / n;
            round_to_scale(v, self.start.abs().max(self.stop.abs()))
        }
    }

    /// The axis as it was given (for hashing and reports).
    pub fn spec(&self) -> String {
        format!(
            "{}={}:{}:{}",
            self.name(),
            super::store::exact_text(self.start),
            super::store::exact_text(self.stop),
            self.count
        )
    }
}

/// `v` rounded to 12 significant digits of `scale` (a decimal place count
/// from the scale, then the nearest double to that decimal text), never
/// negative zero.
fn round_to_scale(v: f64, scale: f64) -> f64 {
    if !(v.is_finite() && scale.is_finite() && scale > 0.0) {
        return v;
    }
    let decimals = (11 - scale.log10().floor() as i64).max(0) as usize;
    format!("{v:.decimals$}")
        .parse::<f64>()
        .map_or(v, |r| r + 0.0)
}

/// A grid over one or more axes, row-major (last axis fastest).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Grid {
    /// The axes, slowest first.
    pub axes: Vec<Axis>,
}

impl Grid {
    /// A grid from parsed axes (at least one).
    pub fn new(axes: Vec<Axis>) -> Result<Grid, SweepError> {
        if axes.is_empty() {
            return Err(SweepError::BadAxis {
                spec: String::new(),
                reason: "expected at least one --vary KEY=START:STOP:COUNT".into(),
            });
        }
        Ok(Grid { axes })
    }

    /// Number of points.
    pub fn len(&self) -> usize {
        self.axes.iter().map(|a| a.count).product()
    }

    /// Always false: every axis has at least one value.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Points along the fastest axis: one line of the grid.
    pub fn line_length(&self) -> usize {
        self.axes.last().map(|a| a.count).unwrap_or(1)
    }

    /// Number of lines (points / line length).
    pub fn lines(&self) -> usize {
        self.len() / self.line_length()
    }

    /// Axis indices of point `index` (row-major, last axis fastest).
    pub fn indices(&self, mut index: usize) -> Vec<usize> {
        let mut out = vec![0; self.axes.len()];
        for (slot, axis) in out.iter_mut().zip(&self.axes).rev() {
            *slot = index % axis.count;
            index /= axis.count;
        }
        out
    }

    /// Axis values of point `index`.
    pub fn values(&self, index: usize) -> Vec<f64> {
        self.indices(index)
            .iter()
            .zip(&self.axes)
            .map(|(&i, a)| a.value(i))
            .collect()
    }

    /// Column names of the axes.
    pub fn names(&self) -> Vec<String> {
        self.axes.iter().map(Axis::name).collect()
    }

    /// The case at point `index`: every axis key set to its value.
    pub fn case_at(&self, case: &Case, index: usize) -> Result<Case, SweepError> {
        let mut c = case.clone();
        for (axis, v) in self.axes.iter().zip(self.values(index)) {
            for &key in &axis.keys {
                c = c.with(key, v).map_err(|e| SweepError::Case {
                    point: index,
                    source: Box::new(e),
                })?;
            }
        }
        Ok(c)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parse_and_order() {
        let (a, bc) = (
            "bias.voltage_v",
            "leads.left.fermi_level_ev+leads.right.fermi_level_ev",
        );
        let g = Grid::new(vec![
            Axis::parse(&format!("{a}=0:1:3")).unwrap(),
            Axis::parse(&format!("{bc}=10:20:2")).unwrap(),
        ])
        .unwrap();
        assert_eq!(g.len(), 6);
        assert_eq!(g.lines(), 3);
        assert_eq!(g.values(0), vec![0.0, 10.0]);
        assert_eq!(g.values(1), vec![0.0, 20.0]);
        assert_eq!(g.values(3), vec![0.5, 20.0]);
        assert_eq!(g.values(5), vec![1.0, 20.0]);
        assert_eq!(g.names(), vec![a.to_string(), bc.to_string()]);
        assert!(Axis::parse(&format!("{a}=0:1")).is_err());
        assert!(Axis::parse(&format!("{a}=0:1:0")).is_err());
        assert!(Axis::parse(&format!("{a}=0:x:2")).is_err());
        assert!(Axis::parse("=0:1:2").is_err());
        assert!(Axis::parse(&format!("{a}=0:1:1")).is_err());
        // Key names are read once, here: a misspelt one is refused with
        // the close match.
        let e = Axis::parse("bias.voltge_v=0:1:2").unwrap_err().to_string();
        assert!(e.contains("did you mean `bias.voltage_v`"), "{e}");
    }

    /// Values between decimal end points are those decimals: 0:0.1 in 11
    /// points gives 0, 0.01, …, 0.1 exactly as parsed from their text
    /// (the plain formula gave 0.030000000000000002 and 0.06999999999999999).
    #[test]
    fn decimal_axes_have_no_float_noise() {
        let a = Axis::parse("bias.voltage_v=0:0.1:11").unwrap();
        for i in 0..11 {
            let want: f64 = format!("0.{i:02}").parse().unwrap();
            let want = if i == 10 { 0.1 } else { want };
            assert_eq!(a.value(i), want, "point {i}");
            // Shortest round-trip text of these values is at most 4 characters.
            assert!(format!("{}", a.value(i)).len() <= 4);
        }
        let b = Axis::parse("bias.voltage_v=-0.3:0.3:7").unwrap();
        let got: Vec<f64> = (0..7).map(|i| b.value(i)).collect();
        assert_eq!(got, vec![-0.3, -0.2, -0.1, 0.0, 0.1, 0.2, 0.3]);
        assert!(got[3].is_sign_positive());
        let c = Axis::parse("leads.left.temperature_k=250:350:5").unwrap();
        assert_eq!(c.value(1), 275.0);
        let d = Axis::parse("bias.voltage_v=1e-9:3e-9:3").unwrap();
        assert_eq!(d.value(1), 2e-9);
    }
}
