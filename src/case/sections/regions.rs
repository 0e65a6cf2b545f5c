//! `[[device.region]]`: potential regions, flat (`offset_ev`) or ramped
//! (`start_ev` to `end_ev`), summed where they overlap. A region that names
//! channels shifts only the orbitals of those channels.

use super::super::check::{Checker, span_of};
use super::super::error::CaseError;
use super::super::raw::{RawCase, RawRegion};
use super::device::DeviceSpec;
use crate::device::{Channels, PotentialRegion};
use toml::Spanned;

/// The validated `[[device.region]]` entries.
#[derive(Clone, Debug, Default)]
pub(crate) struct RegionsSpec {
    /// Regions that shift every orbital of a cell.
    pub regions: Vec<PotentialRegion>,
    /// Regions that shift some orbitals only: the region and the orbitals
    /// of a cell it acts on.
    pub selective: Vec<(PotentialRegion, Vec<usize>)>,
}

impl RegionsSpec {
    /// Validate every entry against the device; regions that cover no cell
    /// add a warning.
    pub fn from_raw(
        raw: &RawCase,
        ck: &Checker<'_>,
        device: &DeviceSpec,
        channels: Option<&Channels>,
        warnings: &mut Vec<String>,
    ) -> Result<Self, CaseError> {
        let all = regions_from_raw(raw, ck, device, warnings)?;
        let mut out = Self::default();
        for (i, (region, names)) in all.into_iter().enumerate() {
            match names {
                None => out.regions.push(region),
                Some(names) => {
                    let orbitals = region_orbitals(raw, ck, i, &names, channels)?;
                    out.selective.push((region, orbitals));
                }
            }
        }
        Ok(out)
    }
}

/// The orbitals of a cell that the channels `names` of region `i` hold.
fn region_orbitals(
    raw: &RawCase,
    ck: &Checker<'_>,
    i: usize,
    names: &[String],
    channels: Option<&Channels>,
) -> Result<Vec<usize>, CaseError> {
    let key = format!("device.region.{i}.channels");
    let span = raw
        .device
        .as_ref()
        .and_then(|d| d.get_ref().region.as_ref())
        .and_then(|r| r.get(i))
        .and_then(|r| span_of(&r.get_ref().channels));
    let Some(set) = channels else {
        return Err(ck.ctx.invalid(
            span,
            &key,
            "channel names defined by [[channel]] tables or by device.spin = \"explicit\"",
            "no channels defined (hint: add [[channel]] tables, or leave `channels` out to \
             shift every orbital)",
        ));
    };
    if names.is_empty() {
        return Err(ck.ctx.invalid(
            span,
            &key,
            "at least one channel name (leave the key out to shift every orbital)",
            "[]",
        ));
    }
    let mut orbitals = Vec::new();
    for name in names {
        let Some(c) = set.index_of(name) else {
            let known = set
                .names()
                .iter()
                .map(|n| format!("\"{n}\""))
                .collect::<Vec<_>>()
                .join(", ");
            return Err(ck.ctx.invalid(
                span,
                &key,
                &format!("names of defined channels ({known})"),
                format!("\"{name}\""),
            ));
        };
        orbitals.extend_from_slice(&set.list[c].orbitals);
    }
    orbitals.sort_unstable();
    orbitals.dedup();
    Ok(orbitals)
}

/// Every region with the channel names it is limited to (`None`: all
/// orbitals).
type RawRegions = Vec<(PotentialRegion, Option<Vec<String>>)>;

fn regions_from_raw(
    raw: &RawCase,
    ck: &Checker<'_>,
    device: &DeviceSpec,
    warnings: &mut Vec<String>,
) -> Result<RawRegions, CaseError> {
    let entries = raw
        .device
        .as_ref()
        .and_then(|d| d.get_ref().region.as_ref());
    let mut regions = Vec::new();
    for (i, r) in entries.into_iter().flatten().enumerate() {
        let prefix = format!("device.region.{i}");
        let region = one_region(r, &prefix, ck, device.length_nm())?;
        device.warn_if_no_cell(&prefix, region.from_nm, region.to_nm, warnings);
        let names = r.get_ref().channels.as_ref().map(|c| c.get_ref().clone());
        regions.push((region, names));
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
