//! Pseudo-terminal pairs standing in for serial devices (shared by the
//! suite and the load test).

use std::fs::File;
use std::io::{Read, Write};
use std::os::fd::{AsRawFd, FromRawFd};
use std::time::{Duration, Instant};

/// A pseudo-terminal pair made with the C library's `posix_openpt`: the
/// master is the device's end (the test writes what a receiver, adapter or
/// logger would send), the slave's path is what termvel opens. The slave is
/// put in raw mode first, as a real serial port's line discipline would be
/// by termvel itself, so nothing is translated before termvel gets there.
pub struct Pty {
    pub master: File,
    pub path: String,
}

impl Pty {
    pub fn new() -> Pty {
        // SAFETY: plain libc calls on a descriptor this function owns; every
        // result is checked before use.
        unsafe {
            let fd = libc::posix_openpt(libc::O_RDWR | libc::O_NOCTTY);
            assert!(fd >= 0, "posix_openpt");
            // Not inherited by termvel: the device end must close when the
            // test closes it.
            assert_eq!(libc::fcntl(fd, libc::F_SETFD, libc::FD_CLOEXEC), 0);
            assert_eq!(libc::grantpt(fd), 0);
            assert_eq!(libc::unlockpt(fd), 0);
            let mut name = [0 as libc::c_char; 128];
            assert_eq!(libc::ptsname_r(fd, name.as_mut_ptr(), name.len()), 0);
            let path = std::ffi::CStr::from_ptr(name.as_ptr()).to_str().unwrap().to_string();
            let master = File::from_raw_fd(fd);
            let slave = std::fs::OpenOptions::new().read(true).write(true).open(&path).unwrap();
            let mut t: libc::termios = std::mem::zeroed();
            assert_eq!(libc::tcgetattr(slave.as_raw_fd(), &mut t), 0);
            libc::cfmakeraw(&mut t);
            assert_eq!(libc::tcsetattr(slave.as_raw_fd(), libc::TCSANOW, &t), 0);
            // Closing our slave leaves the raw settings in place for the
            // next opener, termvel.
            drop(slave);
            Pty { master, path }
        }
    }

    pub fn send(&mut self, bytes: &[u8]) {
        self.master.write_all(bytes).expect("the device end writes");
    }

    /// Reads what termvel wrote to the device until `until` ends it.
    pub fn read_until(&mut self, until: &[u8], within: Duration) -> Vec<u8> {
        let deadline = Instant::now() + within;
        let mut got = Vec::new();
        while !got.ends_with(until) {
            let left = deadline.saturating_duration_since(Instant::now());
            assert!(!left.is_zero(), "nothing ending in {until:?} within {within:?}: {got:?}");
            let mut pfd = libc::pollfd { fd: self.master.as_raw_fd(), events: libc::POLLIN, revents: 0 };
            // SAFETY: one valid pollfd for the duration of the call.
            let n = unsafe { libc::poll(&mut pfd, 1, left.as_millis() as i32) };
            if n > 0 && pfd.revents & libc::POLLIN != 0 {
                let mut b = [0u8; 64];
                // A master read fails with EIO while no slave is open yet.
                if let Ok(k) = self.master.read(&mut b) {
                    got.extend_from_slice(&b[..k]);
                }
            }
            if n > 0 && pfd.revents & libc::POLLIN == 0 {
                std::thread::sleep(Duration::from_millis(10));
            }
        }
        got
    }
}
