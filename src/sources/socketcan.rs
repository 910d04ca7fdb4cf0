//! A SocketCAN interface as a source: classic, remote, error and FD frames,
//! timestamped on arrival; an interface that is down or missing is reported
//! down and reopened with back-off. By default the kernel filters to the ids
//! of the signal map (`--all-ids` takes everything); error frames are always
//! taken, to count bus-off, error-passive and lost-arbitration reports.

use socketcan::{CanAnyFrame, CanFilter, EmbeddedFrame, Frame, Id, SocketOptions};

use super::live::{Backoff, EventSender, Link, SessionClock, Shutdown, sleep_or_stop};
use crate::event::{
    CanFrame, CanId, DataFrame, ErrorFrame, Event, FdFrame, LinkState, Payload, RemoteFrame, SourceId, fd_flags,
};

/// One SocketCAN input.
#[derive(Clone, Debug, PartialEq)]
pub struct CanSpec {
    pub iface: String,
    /// Kernel filters: `None` takes every id.
    pub ids: Option<Vec<CanId>>,
}

fn id_of(id: Id) -> CanId {
    match id {
        Id::Standard(s) => CanId::Standard(s.as_raw()),
        Id::Extended(e) => CanId::Extended(e.as_raw()),
    }
}

/// A socketcan frame as termvel's own.
pub fn from_socketcan(f: &CanAnyFrame) -> Option<CanFrame> {
    Some(match f {
        CanAnyFrame::Normal(d) => CanFrame::Data(DataFrame::new(id_of(d.id()), d.data())?),
        CanAnyFrame::Remote(r) => CanFrame::Remote(RemoteFrame::new(id_of(r.id()), r.dlc() as u8)?),
        CanAnyFrame::Error(e) => CanFrame::Error(ErrorFrame::new(e.id_word() & 0x1FFF_FFFF, e.data())?),
        CanAnyFrame::Fd(fd) => {
            let mut flags = fd_flags::FDF;
            if fd.is_brs() {
                flags |= fd_flags::BRS;
            }
            if fd.is_esi() {
                flags |= fd_flags::ESI;
            }
            CanFrame::Fd(FdFrame::new(id_of(fd.id()), flags, fd.data())?)
        }
    })
}

/// Kernel filters for a list of ids (exact matches, each id's own width).
fn filters(ids: &[CanId]) -> Vec<CanFilter> {
    const EFF: u32 = 0x8000_0000;
    ids.iter()
        .map(|id| match id {
            CanId::Standard(s) => CanFilter::new(*s as u32, 0x7FF | EFF),
            CanId::Extended(e) => CanFilter::new(*e | EFF, 0x1FFF_FFFF | EFF),
        })
        .collect()
}

/// Reads `spec.iface` until shutdown, sending every frame as an event.
pub async fn run(spec: CanSpec, source: SourceId, clock: SessionClock, tx: EventSender, mut stop: Shutdown) {
    let mut link = Link::new(source, clock, tx);
    let mut backoff = Backoff::default();
    loop {
        if *stop.borrow() {
            return;
        }
        let sock = match socketcan::tokio::CanFdSocket::open(&spec.iface) {
            Ok(s) => s,
            Err(e) => {
                // Missing at the start or gone since: retrying either way
                // (the source-down alert covers both).
                if !link.set(LinkState::Retrying, format!("cannot open {}: {e}", spec.iface)).await
                    || sleep_or_stop(backoff.next_wait(), &mut stop).await
                {
                    return;
                }
                continue;
            }
        };
        let setup = (|| -> std::io::Result<()> {
            if let Some(ids) = &spec.ids {
                sock.set_filters(&filters(ids))?;
            }
            sock.set_error_filter_accept_all()
        })();
        if let Err(e) = setup {
            if !link.set(LinkState::Retrying, format!("cannot set up {}: {e}", spec.iface)).await
                || sleep_or_stop(backoff.next_wait(), &mut stop).await
            {
                return;
            }
            continue;
        }
        backoff.reset();
        if !link.set(LinkState::Up, format!("{} open", spec.iface)).await {
            return;
        }
        loop {
            let r = tokio::select! {
                r = sock.read_frame() => r,
                _ = stop.changed() => return,
            };
            match r {
                Ok(f) => {
                    let Some(frame) = from_socketcan(&f) else { continue };
                    if !link.send(Event::new(link.clock.now_ns(), source, Payload::Can(frame))).await {
                        return;
                    }
                }
                Err(e) => {
                    // ENETDOWN when the interface goes down, ENODEV when it
                    // vanishes: report and reopen.
                    if !link.set(LinkState::Down, format!("{}: {e}", spec.iface)).await {
                        return;
                    }
                    break;
                }
            }
        }
        if sleep_or_stop(backoff.next_wait(), &mut stop).await {
            return;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use socketcan::{CanDataFrame, CanFdFrame, CanRemoteFrame, ExtendedId, StandardId};

    #[test]
    fn frames_convert_with_ids_flags_and_data() {
        let d = CanDataFrame::new(StandardId::new(0x123).unwrap(), &[1, 2, 3]).unwrap();
        assert_eq!(
            from_socketcan(&CanAnyFrame::Normal(d)),
            Some(CanFrame::Data(DataFrame::new(CanId::Standard(0x123), &[1, 2, 3]).unwrap()))
        );
        let r = CanRemoteFrame::new_remote(ExtendedId::new(0x1ABCDEF).unwrap(), 4).unwrap();
        assert_eq!(
            from_socketcan(&CanAnyFrame::Remote(r)),
            Some(CanFrame::Remote(RemoteFrame::new(CanId::Extended(0x1ABCDEF), 4).unwrap()))
        );
        let mut fd = CanFdFrame::new(StandardId::new(0x3C0).unwrap(), &[9; 16]).unwrap();
        fd.set_brs(true);
        match from_socketcan(&CanAnyFrame::Fd(fd)) {
            Some(CanFrame::Fd(f)) => {
                assert_eq!(f.data(), &[9; 16]);
                assert_eq!(f.flags() & fd_flags::BRS, fd_flags::BRS);
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn filters_match_each_id_exactly() {
        let f = filters(&[CanId::Standard(0x0C4), CanId::Extended(0x18FEF100)]);
        assert_eq!(f.len(), 2);
    }
}
