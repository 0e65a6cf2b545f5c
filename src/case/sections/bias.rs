//! `[bias]`: the voltage and where it drops.

use super::super::check::{Checker, MAX_ENERGY_EV};
use super::super::error::{CaseError, CaseErrorKind, closest};
use super::super::raw::{Opt, RawCase};
use crate::device::BiasDrop;
use toml::Spanned;

/// A validated `[bias]` table (absent: no bias, dropped at the leads).
#[derive(Clone, Debug)]
pub(crate) struct BiasSpec {
    pub voltage_v: f64,
    pub drop: BiasDrop,
}

impl BiasSpec {
    pub fn from_raw(raw: &RawCase, ck: &Checker<'_>, length_nm: f64) -> Result<Self, CaseError> {
        let Some(b) = raw.bias.as_ref().map(Spanned::get_ref) else {
            return Ok(Self {
                voltage_v: 0.0,
                drop: BiasDrop::Leads,
            });
        };
        let voltage_v = ck
            .ranged(
                &b.voltage_v,
                "bias.voltage_v",
                "a voltage in V of magnitude ≤ 1e6",
                |x| x.abs() <= MAX_ENERGY_EV,
            )?
            .unwrap_or(0.0);
        let drop = match &b.drop {
            None => BiasDrop::Leads,
            Some(d) => parse_drop(ck, d, length_nm)?,
        };
        Ok(Self { voltage_v, drop })
    }
}

const DROP_EXPECTED: &str = "\"leads\" or { linear = { from_nm = …, to_nm = … } }";

/// `drop = "leads"` or `drop = { linear = { from_nm = …, to_nm = … } }`.
fn parse_drop(
    ck: &Checker<'_>,
    d: &Spanned<toml::Value>,
    length_nm: f64,
) -> Result<BiasDrop, CaseError> {
    let span = Some(d.span());
    match d.get_ref() {
        toml::Value::String(s) if s == "leads" => Ok(BiasDrop::Leads),
        toml::Value::String(s) => Err(ck
            .ctx
            .invalid(span, "bias.drop", DROP_EXPECTED, format!("\"{s}\""))
            .with_suggestion(closest(s, ["leads", "linear"]).map(|c| {
                if c == "linear" {
                    "{ linear = { from_nm = …, to_nm = … } }".to_string()
                } else {
                    "leads".to_string()
                }
            }))),
        toml::Value::Table(t) => linear_drop(ck, d, t, length_nm),
        other => Err(ck.ctx.error(
            CaseErrorKind::WrongType,
            span,
            Some("bias.drop"),
            format!("expected {DROP_EXPECTED}, found {}", other.type_str()),
        )),
    }
}

/// The table form: `{ linear = { from_nm, to_nm } }` inside the device.
fn linear_drop(
    ck: &Checker<'_>,
    d: &Spanned<toml::Value>,
    t: &toml::Table,
    length_nm: f64,
) -> Result<BiasDrop, CaseError> {
    let span = Some(d.span());
    if let Some(k) = t.keys().find(|k| k.as_str() != "linear") {
        return Err(ck
            .ctx
            .error(
                CaseErrorKind::UnknownKey,
                span,
                Some(&format!("bias.drop.{k}")),
                format!("expected `linear`, found unknown key `{k}`"),
            )
            .with_suggestion(closest(k, ["linear"]).map(|_| "bias.drop.linear".into())));
    }
    let lin = match t.get("linear") {
        Some(toml::Value::Table(l)) => l,
        Some(other) => {
            return Err(ck.ctx.invalid(
                span,
                "bias.drop.linear",
                "a table { from_nm = …, to_nm = … }",
                other.type_str(),
            ));
        }
        None => {
            return Err(ck
                .ctx
                .missing(span, "bias.drop.linear", "{ from_nm = …, to_nm = … }"));
        }
    };
    if let Some(k) = lin
        .keys()
        .find(|k| k.as_str() != "from_nm" && k.as_str() != "to_nm")
    {
        return Err(ck
            .ctx
            .error(
                CaseErrorKind::UnknownKey,
                span,
                Some(&format!("bias.drop.linear.{k}")),
                format!("expected `from_nm` or `to_nm`, found unknown key `{k}`"),
            )
            .with_suggestion(
                closest(k, ["from_nm", "to_nm"]).map(|c| format!("bias.drop.linear.{c}")),
            ));
    }
    let get = |k: &str| -> Result<Opt<f64>, CaseError> {
        match lin.get(k) {
            None => Ok(None),
            Some(toml::Value::Float(x)) => Ok(Some(Spanned::new(d.span(), *x))),
            Some(toml::Value::Integer(x)) => Ok(Some(Spanned::new(d.span(), *x as f64))),
            Some(other) => Err(ck.ctx.error(
                CaseErrorKind::WrongType,
                span.clone(),
                Some(&format!("bias.drop.linear.{k}")),
                format!("expected a number, found {}", other.type_str()),
            )),
        }
    };
    let (from_nm, to_nm) = ck.region(
        &get("from_nm")?,
        &get("to_nm")?,
        "bias.drop.linear",
        length_nm,
        Some(span),
    )?;
    Ok(BiasDrop::Linear { from_nm, to_nm })
}
