//! `[[device.region]]`: potential regions, flat (`offset_ev`) or ramped
//! (`start_ev` to `end_ev`), summed where they overlap.

use super::super::check::{Checker, span_of};
use super::super::error::CaseError;
use super::super::raw::{RawCase, RawRegion};
use super::device::DeviceSpec;
use crate::device::PotentialRegion;
use toml::Spanned;

/// The validated `[[device.region]]` entries.
#[derive(Clone, Debug, Default)]
pub(crate) struct RegionsSpec {
    pub regions: Vec<PotentialRegion>,
}

impl RegionsSpec {
    /// Validate every entry against the device; regions that cover no cell
    /// add a warning.
    pub fn from_raw(
        raw: &RawCase,
        ck: &Checker<'_>,
        device: &DeviceSpec,
        warnings: &mut Vec<String>,
    ) -> Result<Self, CaseError> {
        let regions = regions_from_raw(raw, ck, device, warnings)?;
        Ok(Self { regions })
    }
}

fn regions_from_raw(
    raw: &RawCase,
    ck: &Checker<'_>,
    device: &DeviceSpec,
    warnings: &mut Vec<String>,
) -> Result<Vec<PotentialRegion>, CaseError> {
    let entries = raw
        .device
        .as_ref()
        .and_then(|d| d.get_ref().region.as_ref());
    let mut regions = Vec::new();
    for (i, r) in entries.into_iter().flatten().enumerate() {
        let prefix = format!("device.region.{i}");
        let region = one_region(r, &prefix, ck, device.length_nm())?;
        let covered = (0..device.cells)
            .filter(|&c| {
                let x = c as f64 * device.spacing_nm;
                x >= region.from_nm && x < region.to_nm
            })
            .count();
        if covered == 0 {
            warnings.push(format!(
                "{prefix} [{}, {}) nm covers no cell (cells sit at multiples of {} nm): it has no effect",
                region.from_nm, region.to_nm, device.spacing_nm
            ));
        }
        regions.push(region);
    }
    Ok(regions)
}

fn one_region(
    r: &Spanned<RawRegion>,
    prefix: &str,
    ck: &Checker<'_>,
    length_nm: f64,
) -> Result<PotentialRegion, CaseError> {
    let span = r.span();
    let r = r.get_ref();
    let (from, to) = ck.region(
        &r.from_nm,
        &r.to_nm,
        prefix,
        length_nm,
        Some(Some(span.clone())),
    )?;
    let off = ck.energy(&r.offset_ev, &format!("{prefix}.offset_ev"))?;
    let start = ck.energy(&r.start_ev, &format!("{prefix}.start_ev"))?;
    let end = ck.energy(&r.end_ev, &format!("{prefix}.end_ev"))?;
    match (off, start, end) {
        (Some(o), None, None) => Ok(PotentialRegion::offset(from, to, o)),
        (None, Some(s), Some(e)) => Ok(PotentialRegion {
            from_nm: from,
            to_nm: to,
            start_ev: s,
            end_ev: e,
        }),
        (Some(_), _, _) => Err(ck.ctx.invalid(
            span_of(&r.start_ev).or(span_of(&r.end_ev)),
            &format!("{prefix}.offset_ev"),
            "either offset_ev (flat) or start_ev + end_ev (ramp)",
            "both",
        )),
        (None, None, Some(_)) | (None, None, None) => Err(ck.ctx.missing(
            Some(span),
            &format!("{prefix}.start_ev"),
            "offset_ev (flat) or start_ev + end_ev (ramp)",
        )),
        (None, Some(_), None) => Err(ck.ctx.missing(
            Some(span),
            &format!("{prefix}.end_ev"),
            "the ramp end value in eV",
        )),
    }
}
