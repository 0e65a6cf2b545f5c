//! Value checks shared by the sections: finite numbers, ranges, integers,
//! choices from a closed set, keys that do not belong, regions inside the
//! device. Every check names the key, what was expected and what was found.

use super::error::{CaseError, CaseErrorKind, ErrorContext, closest};
use super::raw::Opt;
use std::ops::Range;
use toml::Spanned;

/// Energies in eV (given or derived) beyond this size are refused: no band
/// structure this engine models comes near, and it keeps every sum finite.
pub(crate) const MAX_ENERGY_EV: f64 = 1e6;

/// A value with where it came from (for errors found after validation).
#[derive(Clone, Debug)]
pub(crate) struct At<T> {
    pub value: T,
    pub span: Option<Range<usize>>,
}

/// A closed set of words a string key may take, each with its meaning.
pub(crate) trait Choice: Copy + 'static {
    /// The words, in the order they are listed in messages, with their
    /// values.
    const CHOICES: &'static [(&'static str, Self)];
}

/// The words of a closed set, in order.
pub(crate) fn choice_names<T: Choice>() -> Vec<&'static str> {
    T::CHOICES.iter().map(|(n, _)| *n).collect()
}

/// The word of a value of a closed set.
pub(crate) fn choice_name<T: Choice + PartialEq>(value: T) -> &'static str {
    T::CHOICES
        .iter()
        .find(|(_, v)| *v == value)
        .map_or("", |(n, _)| n)
}

/// A number as people write it: plain for ordinary sizes, exponent form
/// for very small or very large ones.
pub(crate) fn show(x: f64) -> String {
    let a = x.abs();
    if a != 0.0 && a.is_finite() && !(1e-4..1e6).contains(&a) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

/// The span of an optional spanned value.
pub(crate) fn span_of<T>(v: &Option<Spanned<T>>) -> Option<Range<usize>> {
    v.as_ref().map(|s| s.span())
}

/// Value checks with positions.
pub(crate) struct Checker<'a> {
    pub ctx: ErrorContext<'a>,
}

impl Checker<'_> {
    /// A finite number (TOML allows nan and inf; they are refused here).
    pub fn num(&self, v: &Opt<f64>, key: &str) -> Result<Option<At<f64>>, CaseError> {
        match v {
            None => Ok(None),
            Some(s) => {
                let x = *s.get_ref();
                if !x.is_finite() {
                    return Err(self
                        .ctx
                        .invalid(Some(s.span()), key, "a finite number", show(x)));
                }
                Ok(Some(At {
                    value: x,
                    span: Some(s.span()),
                }))
            }
        }
    }

    /// A value that must be there; `table` is the span of its table.
    pub fn required<T>(
        &self,
        v: Option<T>,
        table: Option<Range<usize>>,
        key: &str,
        expected: &str,
    ) -> Result<T, CaseError> {
        v.ok_or_else(|| self.ctx.missing(table, key, expected))
    }

    /// A finite number in a range described by `expected`.
    pub fn ranged(
        &self,
        v: &Opt<f64>,
        key: &str,
        expected: &str,
        ok: impl Fn(f64) -> bool,
    ) -> Result<Option<f64>, CaseError> {
        match self.num(v, key)? {
            None => Ok(None),
            Some(a) if ok(a.value) => Ok(Some(a.value)),
            Some(a) => Err(self.ctx.invalid(a.span, key, expected, show(a.value))),
        }
    }

    pub fn positive(&self, v: &Opt<f64>, key: &str, what: &str) -> Result<Option<f64>, CaseError> {
        self.ranged(v, key, &format!("{what} > 0"), |x| x > 0.0)
    }

    pub fn non_negative(
        &self,
        v: &Opt<f64>,
        key: &str,
        what: &str,
    ) -> Result<Option<f64>, CaseError> {
        self.ranged(v, key, &format!("{what} ≥ 0"), |x| x >= 0.0)
    }

    pub fn energy(&self, v: &Opt<f64>, key: &str) -> Result<Option<f64>, CaseError> {
        self.ranged(
            v,
            key,
            &format!("an energy in eV of magnitude ≤ {MAX_ENERGY_EV:e}"),
            |x| x.abs() <= MAX_ENERGY_EV,
        )
    }

    pub fn temperature(&self, v: &Opt<f64>, key: &str) -> Result<Option<f64>, CaseError> {
        self.positive(v, key, "a temperature in K")
    }

    pub fn int(
        &self,
        v: &Opt<i64>,
        key: &str,
        expected: &str,
        ok: impl Fn(i64) -> bool,
    ) -> Result<Option<usize>, CaseError> {
        match v {
            None => Ok(None),
            Some(s) if ok(*s.get_ref()) => Ok(Some(*s.get_ref() as usize)),
            Some(s) => Err(self.ctx.invalid(Some(s.span()), key, expected, s.get_ref())),
        }
    }

    /// One word of a closed set, read into its value.
    pub fn choice<T: Choice>(&self, v: &Opt<String>, key: &str) -> Result<Option<T>, CaseError> {
        let Some(s) = v else { return Ok(None) };
        if let Some((_, value)) = T::CHOICES.iter().find(|(n, _)| *n == s.get_ref()) {
            return Ok(Some(*value));
        }
        let names = choice_names::<T>();
        let list = names
            .iter()
            .map(|c| format!("\"{c}\""))
            .collect::<Vec<_>>()
            .join(" or ");
        Err(self
            .ctx
            .invalid(Some(s.span()), key, &list, format!("\"{}\"", s.get_ref()))
            .with_suggestion(closest(s.get_ref(), names)))
    }

    /// A key that the chosen device kind or model does not use.
    pub fn unused<T>(&self, v: &Opt<T>, key: &str, why: &str) -> Result<(), CaseError> {
        match v {
            None => Ok(()),
            Some(s) => Err(self.ctx.error(
                CaseErrorKind::Invalid,
                Some(s.span()),
                Some(key),
                format!("expected no such key {why}, found it set"),
            )),
        }
    }

    /// An optional [from_nm, to_nm) region inside [0, length]; defaults to
    /// the whole device. With `required = Some(table span)` both ends must
    /// be given.
    pub fn region(
        &self,
        from: &Opt<f64>,
        to: &Opt<f64>,
        prefix: &str,
        length_nm: f64,
        required: Option<Option<Range<usize>>>,
    ) -> Result<(f64, f64), CaseError> {
        let kf = format!("{prefix}.from_nm");
        let kt = format!("{prefix}.to_nm");
        let f = self.num(from, &kf)?;
        let t = self.num(to, &kt)?;
        let (f, t) = match required {
            Some(table) => (
                self.required(f, table.clone(), &kf, "the region start in nm")?,
                self.required(t, table, &kt, "the region end in nm")?,
            ),
            None => (
                f.unwrap_or(At {
                    value: 0.0,
                    span: None,
                }),
                t.unwrap_or(At {
                    value: length_nm,
                    span: None,
                }),
            ),
        };
        self.inside(&f, &kf, length_nm)?;
        self.inside(&t, &kt, length_nm)?;
        if t.value <= f.value {
            return Err(self.ctx.invalid(
                t.span.or(f.span),
                &kt,
                &format!("an end above from_nm = {} nm", f.value),
                format!("{} nm", t.value),
            ));
        }
        Ok((f.value, t.value))
    }

    /// A position inside [0, length] (to a relative 1e-9).
    fn inside(&self, x: &At<f64>, key: &str, length_nm: f64) -> Result<(), CaseError> {
        let tol = 1e-9 * length_nm.max(1.0);
        if x.value < -tol || x.value > length_nm + tol {
            return Err(self.ctx.invalid(
                x.span.clone(),
                key,
                &format!("a position inside the device, 0 to {length_nm} nm"),
                format!("{} nm", x.value),
            ));
        }
        Ok(())
    }
}
