//! A private tmux server per test: start a command in a window of a given
//! size, press keys, read the screen (shared by the suite and the soak test).

#![allow(dead_code)]

use std::process::Command;
use std::time::{Duration, Instant};

fn root() -> std::path::PathBuf {
    std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

pub struct Tmux {
    socket: String,
    /// The session's own config folder (`XDG_CONFIG_HOME`): a `u` pressed
    /// in a test writes its settings here, never in the user's, and the
    /// user's settings do not change what a test sees.
    config: tempfile::TempDir,
}

impl Tmux {
    /// Starts `cmd` in a new tmux server with a `w`×`h` window. After the
    /// command ends the pane stays (remain-on-exit), so what it printed can
    /// be read.
    pub fn start(name: &str, cmd: &str, w: u16, h: u16) -> Tmux {
        let socket = format!("termvel-test-{}-{name}", std::process::id());
        let t = Tmux { socket, config: tempfile::tempdir().expect("a temporary config folder") };
        let status = Command::new("tmux")
            .args(["-L", &t.socket, "-f", "/dev/null", "new-session", "-d", "-x", &w.to_string(), "-y", &h.to_string()])
            .arg(format!("cd {} && {cmd}; echo '[exited' $? ']'; sleep 60", root().display()))
            .env_remove("NO_COLOR")
            .env("XDG_CONFIG_HOME", t.config.path())
            .status()
            .expect("tmux is installed (scripts/setup.sh installs it)");
        assert!(status.success());
        t
    }

    pub fn run(&self, args: &[&str]) -> String {
        let out = Command::new("tmux").args(["-L", &self.socket]).args(args).output().expect("tmux runs");
        String::from_utf8_lossy(&out.stdout).into_owned()
    }

    /// The session's config folder (`XDG_CONFIG_HOME`).
    pub fn config_dir(&self) -> &std::path::Path {
        self.config.path()
    }

    pub fn screen(&self) -> String {
        self.run(&["capture-pane", "-p"])
    }

    pub fn keys(&self, keys: &[&str]) {
        for k in keys {
            self.run(&["send-keys", k]);
            std::thread::sleep(Duration::from_millis(80));
        }
    }

    pub fn type_text(&self, text: &str) {
        self.run(&["send-keys", "-l", text]);
    }

    /// Waits until the screen satisfies `pred`, up to `secs`.
    pub fn wait(&self, secs: f64, what: &str, pred: impl Fn(&str) -> bool) -> String {
        let deadline = Instant::now() + Duration::from_secs_f64(secs);
        loop {
            let s = self.screen();
            if pred(&s) {
                return s;
            }
            assert!(Instant::now() < deadline, "waited {secs} s for {what}; the screen:\n{s}");
            std::thread::sleep(Duration::from_millis(100));
        }
    }

    /// Whether the pane shows the alternate screen (a full-screen program).
    pub fn alternate_on(&self) -> bool {
        self.run(&["display-message", "-p", "#{alternate_on}"]).trim() == "1"
    }

    pub fn pid(&self) -> u32 {
        // The pane runs a shell; termvel is its child.
        let shell: u32 = self.run(&["display-message", "-p", "#{pane_pid}"]).trim().parse().expect("pane pid");
        let out = Command::new("pgrep").args(["-P", &shell.to_string(), "termvel"]).output().expect("pgrep");
        String::from_utf8_lossy(&out.stdout).lines().next().and_then(|l| l.trim().parse().ok()).expect("termvel's pid")
    }
}

impl Drop for Tmux {
    fn drop(&mut self) {
        let _ = Command::new("tmux").args(["-L", &self.socket, "kill-server"]).status();
    }
}
