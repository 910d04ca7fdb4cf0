//! A mosquitto for the sharing benches (`share_cost`, `share_fanout`):
//! on a free loopback port, anonymous, killed when dropped. Included by
//! each with `#[path]` (a bench is its own crate).

use std::net::{Ipv4Addr, TcpListener, TcpStream};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

/// A mosquitto on 127.0.0.1, killed when dropped.
/// (The directory holds its config while it runs.)
pub struct Broker(Child, pub u16, #[allow(dead_code)] tempfile::TempDir);

impl Broker {
    pub fn start() -> Broker {
        let port = TcpListener::bind((Ipv4Addr::LOCALHOST, 0)).unwrap().local_addr().unwrap().port();
        let dir = tempfile::tempdir().unwrap();
        let conf = dir.path().join("mosquitto.conf");
        std::fs::write(&conf, format!("listener {port} 127.0.0.1\npersistence false\nallow_anonymous true\n")).unwrap();
        let child = Command::new("/usr/sbin/mosquitto")
            .arg("-c")
            .arg(&conf)
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("mosquitto (scripts/setup.sh installs it)");
        let until = Instant::now() + Duration::from_secs(10);
        while TcpStream::connect((Ipv4Addr::LOCALHOST, port)).is_err() {
            assert!(Instant::now() < until, "mosquitto listens");
            std::thread::sleep(Duration::from_millis(20));
        }
        Broker(child, port, dir)
    }
}

impl Drop for Broker {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}
