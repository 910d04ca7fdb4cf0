//! A SocketCAN interface as a source: classic, remote, error and FD frames,
//! timestamped on arrival; an interface that is down or missing is reported
//! down and reopened with back-off. By default the kernel filters to the ids
//! of the signal map (`--all-ids` takes everything); error frames are always
//! taken, to count bus-off, error-passive and lost-arbitration reports.

use std::os::fd::{AsRawFd, RawFd};

use socketcan::{CanFdSocket, CanFilter, Socket, SocketOptions};
use tokio::io::Interest;
use tokio::io::unix::AsyncFd;

use super::link::{Backoff, EventSender, Link, SessionClock, Shutdown, sleep_or_stop};
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

const CAN_EFF_FLAG: u32 = 0x8000_0000;
const CAN_RTR_FLAG: u32 = 0x4000_0000;
const CAN_ERR_FLAG: u32 = 0x2000_0000;
/// Size of `struct can_frame` and of `struct canfd_frame`.
const CAN_MTU: usize = 16;
const CANFD_MTU: usize = 72;

/// Decodes one frame as the kernel hands it to a CAN_RAW socket (see the
/// kernel's Documentation/networking/can.rst): a `struct can_frame` (16
/// bytes: identifier word with the EFF, RTR and ERR flags, length, three
/// bytes of padding and DLC, eight data bytes) or a `struct canfd_frame` (72
/// bytes: identifier word, length, FD flags, two reserved bytes, 64 data
/// bytes). `None` for anything else.
pub fn from_raw(b: &[u8]) -> Option<CanFrame> {
    if b.len() != CAN_MTU && b.len() != CANFD_MTU {
        return None;
    }
    let word = u32::from_ne_bytes([b[0], b[1], b[2], b[3]]);
    let len = b[4] as usize;
    let id = if word & CAN_EFF_FLAG != 0 {
        CanId::Extended(word & 0x1FFF_FFFF)
    } else {
        CanId::Standard((word & 0x7FF) as u16)
    };
    if b.len() == CANFD_MTU {
        let flags = fd_flags::FDF | (b[5] & (fd_flags::BRS | fd_flags::ESI));
        return Some(CanFrame::Fd(FdFrame::new(id, flags, b.get(8..8 + len)?)?));
    }
    Some(if word & CAN_ERR_FLAG != 0 {
        CanFrame::Error(ErrorFrame::new(word & 0x1FFF_FFFF, &b[8..16])?)
    } else if word & CAN_RTR_FLAG != 0 {
        CanFrame::Remote(RemoteFrame::new(id, len as u8)?)
    } else {
        CanFrame::Data(DataFrame::new(id, b.get(8..8 + len)?)?)
    })
}

/// What is wrong with one message read from the socket. Each is counted as
/// a bad line of the source (an alert, the summary's `parse_errors`) and
/// recorded as a line starting with `!`, which a replay counts the same way.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
pub enum RawProblem {
    /// Not the size of a `struct can_frame` (16) or `struct canfd_frame`
    /// (72), or cut short by the kernel (MSG_TRUNC): the frame is dropped.
    #[error("SocketCAN: a message of {len} bytes{} is not a CAN frame (16 or 72 bytes); dropped", if *truncated { " (cut short)" } else { "" })]
    WrongSize { len: usize, truncated: bool },
    /// The right size, but its length byte makes no frame: dropped.
    #[error("SocketCAN: a {len}-byte message with length byte {length} holds no CAN frame; dropped")]
    Invalid { len: usize, length: u8 },
    /// The kernel cut the ancillary data (MSG_CTRUNC): the frame is kept,
    /// but a drop count riding on it may be missing.
    #[error(
        "SocketCAN: the kernel cut a message's ancillary data (MSG_CTRUNC); a count of dropped frames may be missing"
    )]
    ControlTruncated,
}

impl RawProblem {
    /// The line recorded for it: `!`, the problem in short, the bytes in hex.
    pub fn line(&self, bytes: &[u8]) -> Vec<u8> {
        let mut l = match self {
            RawProblem::ControlTruncated => b"!socketcan control-truncated".to_vec(),
            RawProblem::WrongSize { len, .. } | RawProblem::Invalid { len, .. } => {
                format!("!socketcan bad-frame {len} bytes ").into_bytes()
            }
        };
        if !matches!(self, RawProblem::ControlTruncated) {
            for b in bytes.iter().take(CANFD_MTU) {
                l.extend_from_slice(format!("{b:02X}").as_bytes());
            }
        }
        l
    }
}

/// Classifies one message read from the socket (its bytes and the
/// `msg_flags` the kernel set): the frame, or why there is none; and a
/// problem with its ancillary data, which leaves the frame usable.
pub fn classify(b: &[u8], msg_flags: libc::c_int) -> (Result<CanFrame, RawProblem>, Option<RawProblem>) {
    let ctrunc = (msg_flags & libc::MSG_CTRUNC != 0).then_some(RawProblem::ControlTruncated);
    let truncated = msg_flags & libc::MSG_TRUNC != 0;
    if truncated || (b.len() != CAN_MTU && b.len() != CANFD_MTU) {
        return (Err(RawProblem::WrongSize { len: b.len(), truncated }), ctrunc);
    }
    let frame = from_raw(b).ok_or(RawProblem::Invalid { len: b.len(), length: b[4] });
    (frame, ctrunc)
}

/// Frames read with one system call when the socket has them queued.
const BATCH: usize = 64;

/// Buffers for `recvmmsg`: each message's frame, and its ancillary data
/// (the socket's drop counter, `SO_RXQ_OVFL`).
struct RecvBatch {
    frames: Box<[[u8; CANFD_MTU]; BATCH]>,
    control: Box<[[u64; 8]; BATCH]>,
    lens: [usize; BATCH],
    /// Each message's `msg_flags` (MSG_TRUNC, MSG_CTRUNC).
    flags: [libc::c_int; BATCH],
    drops: [Option<u32>; BATCH],
}

impl RecvBatch {
    fn new() -> RecvBatch {
        RecvBatch {
            frames: Box::new([[0; CANFD_MTU]; BATCH]),
            control: Box::new([[0; 8]; BATCH]),
            lens: [0; BATCH],
            flags: [0; BATCH],
            drops: [None; BATCH],
        }
    }

    /// Reads what is queued, without waiting: up to [`BATCH`] frames.
    fn recv(&mut self, fd: RawFd) -> std::io::Result<usize> {
        // SAFETY: every pointer handed to recvmmsg points into buffers owned
        // by `self` or this frame, alive for the call, with their true sizes;
        // the kernel writes at most msg_len bytes and msg_controllen bytes.
        unsafe {
            let mut iov: [libc::iovec; BATCH] = std::mem::zeroed();
            let mut hdrs: [libc::mmsghdr; BATCH] = std::mem::zeroed();
            for i in 0..BATCH {
                iov[i] = libc::iovec { iov_base: self.frames[i].as_mut_ptr().cast(), iov_len: CANFD_MTU };
                let h = &mut hdrs[i].msg_hdr;
                h.msg_iov = &mut iov[i];
                h.msg_iovlen = 1;
                h.msg_control = self.control[i].as_mut_ptr().cast();
                h.msg_controllen = size_of::<[u64; 8]>() as _;
            }
            let n = libc::recvmmsg(fd, hdrs.as_mut_ptr(), BATCH as u32, libc::MSG_DONTWAIT, std::ptr::null_mut());
            if n < 0 {
                return Err(std::io::Error::last_os_error());
            }
            let n = n as usize;
            for (i, h) in hdrs.iter().enumerate().take(n) {
                self.lens[i] = h.msg_len as usize;
                self.flags[i] = h.msg_hdr.msg_flags;
                self.drops[i] = None;
                let mut c = libc::CMSG_FIRSTHDR(&h.msg_hdr);
                while !c.is_null() {
                    if (*c).cmsg_level == libc::SOL_SOCKET && (*c).cmsg_type == libc::SO_RXQ_OVFL {
                        self.drops[i] = Some(std::ptr::read_unaligned(libc::CMSG_DATA(c).cast::<u32>()));
                    }
                    c = libc::CMSG_NXTHDR(&h.msg_hdr, c);
                }
            }
            Ok(n)
        }
    }
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

/// Receive buffer asked of the kernel: about 40 000 frames, half a second of
/// a bus at ten times saturation, so a scheduling hiccup on a busy laptop
/// does not lose frames. With `CAP_NET_ADMIN` (root) the request is forced
/// past `net.core.rmem_max`; otherwise the kernel caps it there.
pub const RECEIVE_BUFFER: usize = 32 << 20;

/// Asks for the receive buffer and for the drop counter on every message.
fn tune_socket(fd: RawFd) {
    let one: libc::c_int = 1;
    // SAFETY: setsockopt on a socket this task owns, with an int option.
    unsafe {
        libc::setsockopt(
            fd,
            libc::SOL_SOCKET,
            libc::SO_RXQ_OVFL,
            (&one as *const libc::c_int).cast(),
            size_of::<libc::c_int>() as libc::socklen_t,
        );
    }
    let size = RECEIVE_BUFFER as libc::c_int;
    for opt in [libc::SO_RCVBUFFORCE, libc::SO_RCVBUF] {
        // SAFETY: setsockopt on a socket this task owns, with an int option.
        let r = unsafe {
            libc::setsockopt(
                fd,
                libc::SOL_SOCKET,
                opt,
                (&size as *const libc::c_int).cast(),
                size_of::<libc::c_int>() as libc::socklen_t,
            )
        };
        if r == 0 {
            return;
        }
    }
}

/// How often the socket's drop count is asked for.
const DROPS_CHECK: std::time::Duration = std::time::Duration::from_millis(250);

/// Frames the kernel dropped on this socket so far (`SO_MEMINFO`,
/// `SK_MEMINFO_DROPS`), when it says.
fn socket_drops(fd: RawFd) -> Option<u32> {
    const SK_MEMINFO_DROPS: usize = 8;
    let mut info = [0u32; 9];
    let mut len = size_of::<[u32; 9]>() as libc::socklen_t;
    // SAFETY: getsockopt writes at most `len` bytes into `info`.
    let r = unsafe { libc::getsockopt(fd, libc::SOL_SOCKET, libc::SO_MEMINFO, info.as_mut_ptr().cast(), &mut len) };
    (r == 0 && len as usize > SK_MEMINFO_DROPS * 4).then_some(info[SK_MEMINFO_DROPS])
}

/// Whether the interface is administratively up, from sysfs (`None` when
/// that cannot be read: the socket's own errors will tell).
fn iface_up(iface: &str) -> Option<bool> {
    let flags = std::fs::read_to_string(format!("/sys/class/net/{iface}/flags")).ok()?;
    let flags = u32::from_str_radix(flags.trim().trim_start_matches("0x"), 16).ok()?;
    Some(flags & libc::IFF_UP as u32 != 0)
}

/// Reads `spec.iface` until shutdown, sending every frame as an event.
pub async fn run(spec: CanSpec, source: SourceId, clock: SessionClock, tx: EventSender, mut stop: Shutdown) {
    let mut link = Link::new(source, clock, tx);
    let mut backoff = Backoff::default();
    let mut batch = RecvBatch::new();
    let mut events = Vec::with_capacity(BATCH + 1);
    loop {
        if *stop.borrow() {
            return;
        }
        // An interface that is there but down binds without complaint and
        // then fails every read: wait for it to come up instead.
        if iface_up(&spec.iface) == Some(false) {
            if link.wait_to_retry(LinkState::Retrying, format!("{} is down", spec.iface), &mut backoff, &mut stop).await
            {
                return;
            }
            continue;
        }
        let sock = match CanFdSocket::open(&spec.iface) {
            Ok(s) => s,
            Err(e) => {
                // Missing at the start or gone since: retrying either way
                // (the source-down alert covers both).
                if link
                    .wait_to_retry(
                        LinkState::Retrying,
                        format!("cannot open {}: {e}", spec.iface),
                        &mut backoff,
                        &mut stop,
                    )
                    .await
                {
                    return;
                }
                continue;
            }
        };
        tune_socket(sock.as_raw_fd());
        let setup = (|| -> std::io::Result<AsyncFd<CanFdSocket>> {
            if let Some(ids) = &spec.ids {
                sock.set_filters(&filters(ids))?;
            }
            sock.set_error_filter_accept_all()?;
            sock.set_nonblocking(true)?;
            // Error readiness too: the kernel reports an interface going
            // down or away as a socket error, with no data to read.
            // SAFETY: the socket owns its descriptor, which stays open and
            // the same until the AsyncFd (its owner now) is dropped.
            unsafe { AsyncFd::register_with_interest(sock, Interest::READABLE | Interest::ERROR) }
                .map_err(std::io::Error::from)
        })();
        let sock = match setup {
            Ok(s) => s,
            Err(e) => {
                if link
                    .wait_to_retry(
                        LinkState::Retrying,
                        format!("cannot set up {}: {e}", spec.iface),
                        &mut backoff,
                        &mut stop,
                    )
                    .await
                {
                    return;
                }
                continue;
            }
        };
        backoff.reset();
        if !link.set(LinkState::Up, format!("{} open", spec.iface)).await {
            return;
        }
        let mut drops_seen = 0u32;
        // The drop counter rides on the next frame queued after a drop; if
        // none comes (the bus fell quiet just then), the socket's own count
        // tells, asked four times a second.
        let mut drops_check = tokio::time::interval(DROPS_CHECK);
        drops_check.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Delay);
        loop {
            let mut ready = tokio::select! {
                _ = drops_check.tick() => {
                    if let Some(d) = socket_drops(sock.get_ref().as_raw_fd())
                        && d > drops_seen
                    {
                        let ev = Event::new(link.clock.now_ns(), source, Payload::Lost(u64::from(d - drops_seen)));
                        drops_seen = d;
                        if !link.send(ev).await {
                            return;
                        }
                    }
                    continue;
                }
                r = sock.ready(Interest::READABLE | Interest::ERROR) => match r {
                    Ok(g) => g,
                    Err(e) => {
                        if !link.set(LinkState::Down, format!("{}: {e}", spec.iface)).await {
                            return;
                        }
                        break;
                    }
                },
                _ = stop.changed() => return,
            };
            match batch.recv(sock.get_ref().as_raw_fd()) {
                Ok(n) => {
                    // One stamp for what one read returned: it had all
                    // arrived by now.
                    let t = link.clock.now_ns();
                    for i in 0..n {
                        if let Some(d) = batch.drops[i]
                            && d > drops_seen
                        {
                            events.push(Event::new(t, source, Payload::Lost(u64::from(d - drops_seen))));
                            drops_seen = d;
                        }
                        // The buffer holds at most a CAN FD frame; the
                        // kernel says the true length of a longer one.
                        let bytes = &batch.frames[i][..batch.lens[i].min(CANFD_MTU)];
                        let (frame, ctrunc) = classify(bytes, batch.flags[i]);
                        let bad = |p: RawProblem| Payload::BadLine { line: p.line(bytes), error: p.to_string() };
                        if let Some(p) = ctrunc {
                            events.push(Event::new(t, source, bad(p)));
                        }
                        events.push(Event::new(
                            t,
                            source,
                            match frame {
                                Ok(frame) => Payload::Can(frame),
                                Err(p) => bad(p),
                            },
                        ));
                    }
                    if !link.send_all(&mut events).await {
                        return;
                    }
                }
                Err(e) if e.kind() == std::io::ErrorKind::WouldBlock => ready.clear_ready(),
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
        drop(sock);
        if sleep_or_stop(backoff.next_wait(), &mut stop).await {
            return;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A `struct can_frame` laid out by hand, as the kernel's can.h has it.
    fn classic(word: u32, len: u8, data: &[u8]) -> [u8; 16] {
        let mut b = [0u8; 16];
        b[..4].copy_from_slice(&word.to_ne_bytes());
        b[4] = len;
        b[8..8 + data.len()].copy_from_slice(data);
        b
    }

    #[test]
    fn kernel_frames_decode_with_ids_flags_and_data() {
        assert_eq!(
            from_raw(&classic(0x123, 3, &[1, 2, 3])),
            Some(CanFrame::Data(DataFrame::new(CanId::Standard(0x123), &[1, 2, 3]).unwrap()))
        );
        assert_eq!(
            from_raw(&classic(0x01AB_CDEF | CAN_EFF_FLAG, 0, &[])),
            Some(CanFrame::Data(DataFrame::new(CanId::Extended(0x01AB_CDEF), &[]).unwrap()))
        );
        assert_eq!(
            from_raw(&classic(0x01AB_CDEF | CAN_EFF_FLAG | CAN_RTR_FLAG, 4, &[])),
            Some(CanFrame::Remote(RemoteFrame::new(CanId::Extended(0x01AB_CDEF), 4).unwrap()))
        );
        // Bus-off: class 0x40 in the identifier, the error flag set.
        match from_raw(&classic(0x40 | CAN_ERR_FLAG, 8, &[0; 8])) {
            Some(CanFrame::Error(e)) => assert!(e.is_bus_off()),
            other => panic!("{other:?}"),
        }
        let mut fd = [0u8; 72];
        fd[..4].copy_from_slice(&0x3C0u32.to_ne_bytes());
        fd[4] = 16;
        fd[5] = 0x01; // CANFD_BRS
        fd[8..24].copy_from_slice(&[9; 16]);
        match from_raw(&fd) {
            Some(CanFrame::Fd(f)) => {
                assert_eq!((f.id(), f.data()), (CanId::Standard(0x3C0), &[9u8; 16][..]));
                assert_eq!(f.flags(), fd_flags::FDF | fd_flags::BRS);
            }
            other => panic!("{other:?}"),
        }
        // A length the frame cannot hold, and sizes that are no frame.
        assert_eq!(from_raw(&classic(0x123, 9, &[])), None);
        assert_eq!(from_raw(&[0u8; 15]), None);
        assert_eq!(from_raw(&[0u8; 24]), None);
    }

    // Issue 13, item 13: frames of an unexpected size were dropped
    // uncounted, and a truncated control message was not checked.
    #[test]
    fn sizes_and_flags_are_classified_and_each_problem_is_counted_as_an_error() {
        let good = classic(0x123, 2, &[1, 2]);
        let frame = CanFrame::Data(DataFrame::new(CanId::Standard(0x123), &[1, 2]).unwrap());
        assert_eq!(classify(&good, 0), (Ok(frame), None));
        // The ancillary data cut: the frame is kept, the problem reported.
        assert_eq!(classify(&good, libc::MSG_CTRUNC), (Ok(frame), Some(RawProblem::ControlTruncated)));
        // Sizes that are no frame, and a frame cut short.
        for len in [0, 8, 15, 17, 24, 71] {
            let (f, c) = classify(&[0u8; 72][..len], 0);
            assert_eq!(f, Err(RawProblem::WrongSize { len, truncated: false }), "{len}");
            assert_eq!(c, None);
        }
        let (f, _) = classify(&[0u8; 72], libc::MSG_TRUNC);
        assert_eq!(f, Err(RawProblem::WrongSize { len: 72, truncated: true }));
        // The right size, an impossible length.
        assert_eq!(classify(&classic(0x123, 9, &[]), 0).0, Err(RawProblem::Invalid { len: 16, length: 9 }));
        // The recorded line starts with `!`, which no adapter message does,
        // so a replay counts it as an error of the source too.
        let line = RawProblem::WrongSize { len: 3, truncated: false }.line(&[0xAB, 1, 2]);
        assert_eq!(line, b"!socketcan bad-frame 3 bytes AB0102");
        assert!(crate::decode::serial_line::adapter_message(&line).is_err());
        assert!(crate::decode::serial_line::adapter_message(&RawProblem::ControlTruncated.line(&[])).is_err());
        assert!(RawProblem::ControlTruncated.to_string().contains("MSG_CTRUNC"));
    }

    #[test]
    fn filters_match_each_id_exactly() {
        let f = filters(&[CanId::Standard(0x0C4), CanId::Extended(0x18FEF100)]);
        assert_eq!(f.len(), 2);
    }
}
