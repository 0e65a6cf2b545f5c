//! `[[channel]]`: named groups of the orbitals of a cell, and the channels
//! "up" and "down" that `device.spin = "explicit"` defines.

use super::super::check::Checker;
use super::super::error::CaseError;
use super::super::raw::{RawCase, RawChannel};
use super::device::DeviceSpec;
use crate::device::{Channel, Channels, OTHER_CHANNEL};

/// The validated channels: `None` when the case names none (and spin is
/// not explicit), so results keep their channel-free form.
#[derive(Clone, Debug, Default)]
pub(crate) struct ChannelsSpec {
    pub channels: Option<Channels>,
}

impl ChannelsSpec {
    /// Validate every `[[channel]]` against the orbitals of a cell; with
    /// explicit spin the channels are "up" and "down" and `[[channel]]` is
    /// refused. A note says which orbitals fell to the implicit channel.
    pub fn from_raw(
        raw: &RawCase,
        ck: &Checker<'_>,
        device: &DeviceSpec,
        notes: &mut Vec<String>,
    ) -> Result<Self, CaseError> {
        let entries = raw.channel.as_deref().unwrap_or_default();
        let b = device.orbitals();
        if device.spin_explicit {
            if let Some(first) = entries.first() {
                return Err(ck.ctx.invalid(
                    Some(first.span()),
                    "channel",
                    "no [[channel]] entries with device.spin = \"explicit\" (it defines the \
                     channels \"up\" and \"down\"; hint: remove the [[channel]] tables, or \
                     write the spin orbitals into block files and name them there)",
                    format!("{} [[channel]] table(s)", entries.len()),
                ));
            }
            return Ok(Self {
                channels: Some(Channels::spin(b / 2)),
            });
        }
        if entries.is_empty() {
            return Ok(Self::default());
        }
        let named = entries
            .iter()
            .enumerate()
            .map(|(i, e)| one_channel(i, e, ck, b))
            .collect::<Result<Vec<_>, _>>()?;
        let channels = Channels::new(b, named).map_err(|err| {
            ck.ctx.invalid(
                raw.channel
                    .as_ref()
                    .and_then(|c| c.first())
                    .map(|c| c.span()),
                "channel",
                &format!(
                    "channels that split the {b} orbitals of a cell without overlap \
                     (indices 0 to {})",
                    b.saturating_sub(1)
                ),
                err.to_string(),
            )
        })?;
        if let Some(other) = channels.list.iter().find(|c| c.name == OTHER_CHANNEL)
            && channels.list.len() > entries.len()
        {
            notes.push(format!(
                "orbitals {:?} of each cell are in no [[channel]]: they form the channel \"{OTHER_CHANNEL}\"",
                other.orbitals
            ));
        }
        Ok(Self {
            channels: Some(channels),
        })
    }
}

/// Entry `i` of `[[channel]]`: its name and orbitals (range and overlap
/// are checked on the whole set).
fn one_channel(
    i: usize,
    e: &toml::Spanned<RawChannel>,
    ck: &Checker<'_>,
    b: usize,
) -> Result<Channel, CaseError> {
    let span = e.span();
    let e = e.get_ref();
    let key = |k: &str| format!("channel.{i}.{k}");
    let Some(name) = &e.name else {
        return Err(ck
            .ctx
            .missing(Some(span), &key("name"), "the channel's name"));
    };
    if name.get_ref().trim().is_empty() {
        return Err(ck
            .ctx
            .invalid(Some(name.span()), &key("name"), "a non-empty name", "\"\""));
    }
    let Some(list) = &e.orbitals else {
        return Err(ck.ctx.missing(
            Some(span),
            &key("orbitals"),
            &format!("the orbitals of a cell the channel holds, e.g. [0, 1] (a cell has {b})"),
        ));
    };
    Ok(Channel {
        name: name.get_ref().clone(),
        orbitals: list
            .get_ref()
            .iter()
            .map(|&o| usize::try_from(o).unwrap_or(usize::MAX))
            .collect(),
    })
}
