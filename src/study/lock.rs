//! Per-run locks: before a process writes a run's folder it creates `run.lock` there exclusively, with its
//! host, process id and start time, so two `termwise run` processes (or two Slurm tasks given the same cell)
//! sharing one results folder never write the same run. A lock whose owner is gone is stale and reclaimed:
//! at once when the owner ran on this host and its process id is dead, otherwise when neither the lock nor
//! the run's heartbeat has moved for the stale limit.

use crate::fsio::{host_tag, pid_alive};
use serde::{Deserialize, Serialize};
use std::io::Write as _;
use std::path::{Path, PathBuf};

/// File name of a run's lock, inside the run folder.
pub const LOCK_FILE: &str = "run.lock";
/// Taken while a stale lock is being removed, so two processes never remove each other's fresh lock.
const RECLAIM_FILE: &str = "run.lock.reclaim";
/// Age after which a leftover reclaim file (its process died in the few instructions it is held) is removed, s.
const RECLAIM_STALE_S: u64 = 60;

/// Who holds a lock.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct LockOwner {
    /// Host name (as in temporary file names).
    pub host: String,
    /// Process id on that host.
    pub pid: u32,
    /// Unix time the lock was taken, s.
    pub since_unix: u64,
}

impl std::fmt::Display for LockOwner {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "process {} on host {}", self.pid, self.host)
    }
}

/// Whether a lock still binds.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Holder {
    /// No lock file.
    Free,
    /// A live owner (or one on another host whose heartbeat is recent).
    Live(LockOwner),
    /// The owner is gone: its pid is dead on this host, or its heartbeat stopped more than the limit ago.
    Stale(LockOwner),
}

/// A held lock; dropping it removes the lock file (when it is still ours).
#[derive(Debug)]
pub struct RunLock {
    path: PathBuf,
    text: String,
}

impl Drop for RunLock {
    fn drop(&mut self) {
        if std::fs::read_to_string(&self.path).is_ok_and(|t| t == self.text) {
            let _ = std::fs::remove_file(&self.path);
        }
    }
}

/// The outcome of [`try_lock`].
#[derive(Debug)]
pub enum Acquire {
    /// This process now owns the run.
    Acquired(RunLock),
    /// Another live process owns it.
    Busy(LockOwner),
}

fn now_unix() -> u64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0)
}

/// Seconds since `path` was last modified (0 when unknown).
fn age_s(path: &Path) -> u64 {
    std::fs::metadata(path)
        .and_then(|m| m.modified())
        .ok()
        .and_then(|t| t.elapsed().ok())
        .map_or(0, |d| d.as_secs())
}

/// Judge the lock of run folder `dir` at time `now_unix`: a lock of this host binds while its process lives;
/// a lock of another host binds while the newer of its start time and the run's heartbeat is at most
/// `stale_after_s` old. A lock file that cannot be parsed (its writer died between creating and filling it)
/// binds for 10 s after its last change.
pub fn holder(dir: &Path, now_unix: u64, stale_after_s: u64) -> Holder {
    let path = dir.join(LOCK_FILE);
    let Ok(text) = std::fs::read_to_string(&path) else {
        return Holder::Free;
    };
    let Ok(owner) = serde_json::from_str::<LockOwner>(&text) else {
        let unknown = LockOwner {
            host: "?".into(),
            pid: 0,
            since_unix: 0,
        };
        return if age_s(&path) > 10 {
            Holder::Stale(unknown)
        } else {
            Holder::Live(unknown)
        };
    };
    if owner.host == host_tag() {
        return if pid_alive(owner.pid) {
            Holder::Live(owner)
        } else {
            Holder::Stale(owner)
        };
    }
    let beat = crate::results::read_run(dir)
        .ok()
        .flatten()
        .map_or(0, |r| r.heartbeat_unix);
    if now_unix.saturating_sub(owner.since_unix.max(beat)) > stale_after_s {
        Holder::Stale(owner)
    } else {
        Holder::Live(owner)
    }
}

/// Take the lock of run folder `dir` (created when missing), reclaiming a stale one.
pub fn try_lock(dir: &Path, stale_after_s: u64) -> std::io::Result<Acquire> {
    std::fs::create_dir_all(dir)?;
    let path = dir.join(LOCK_FILE);
    for _ in 0..4 {
        match std::fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&path)
        {
            Ok(mut f) => {
                let owner = LockOwner {
                    host: host_tag(),
                    pid: std::process::id(),
                    since_unix: now_unix(),
                };
                let text = serde_json::to_string(&owner).expect("lock owner serialises");
                f.write_all(text.as_bytes())?;
                f.sync_all()?;
                return Ok(Acquire::Acquired(RunLock { path, text }));
            }
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {}
            Err(e) => return Err(e),
        }
        let seen = match std::fs::read_to_string(&path) {
            Ok(t) => t,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => continue,
            Err(e) => return Err(e),
        };
        match holder(dir, now_unix(), stale_after_s) {
            Holder::Free => continue,
            Holder::Live(owner) => return Ok(Acquire::Busy(owner)),
            Holder::Stale(owner) => {
                if !reclaim(dir, &seen)? {
                    return Ok(Acquire::Busy(owner));
                }
            }
        }
    }
    // Four rounds of losing the race for a freed lock: someone else is taking it.
    let owner = match holder(dir, now_unix(), stale_after_s) {
        Holder::Live(o) | Holder::Stale(o) => o,
        Holder::Free => LockOwner {
            host: "?".into(),
            pid: 0,
            since_unix: 0,
        },
    };
    Ok(Acquire::Busy(owner))
}

/// Remove the stale lock whose text is `seen`, under the reclaim file. Returns false when another process
/// is reclaiming at the same moment.
fn reclaim(dir: &Path, seen: &str) -> std::io::Result<bool> {
    let guard = dir.join(RECLAIM_FILE);
    match std::fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(&guard)
    {
        Ok(_) => {}
        Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
            if age_s(&guard) > RECLAIM_STALE_S {
                let _ = std::fs::remove_file(&guard);
            }
            return Ok(false);
        }
        Err(e) => return Err(e),
    }
    let path = dir.join(LOCK_FILE);
    // Only the very lock judged stale goes; a fresh lock taken meanwhile stays.
    if std::fs::read_to_string(&path).is_ok_and(|t| t == seen) {
        tracing::info!("reclaiming stale lock {}: {seen}", path.display());
        let _ = std::fs::remove_file(&path);
    }
    std::fs::remove_file(&guard)?;
    Ok(true)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scratch(name: &str) -> PathBuf {
        let d = std::env::temp_dir().join(format!("termwise-lock-{}-{name}", std::process::id()));
        let _ = std::fs::remove_dir_all(&d);
        d
    }

    #[test]
    fn second_taker_is_refused_and_release_frees() {
        let d = scratch("excl");
        let Acquire::Acquired(l) = try_lock(&d, 600).unwrap() else {
            panic!("first lock must succeed")
        };
        match try_lock(&d, 600).unwrap() {
            Acquire::Busy(o) => assert_eq!(o.pid, std::process::id()),
            Acquire::Acquired(_) => panic!("a held lock was taken twice"),
        }
        drop(l);
        assert!(!d.join(LOCK_FILE).exists());
        assert!(matches!(try_lock(&d, 600).unwrap(), Acquire::Acquired(_)));
        std::fs::remove_dir_all(&d).unwrap();
    }

    #[test]
    fn dead_pid_on_this_host_is_stale_at_once_and_reclaimed() {
        let d = scratch("dead");
        std::fs::create_dir_all(&d).unwrap();
        // Process ids above the kernel's pid_max limit (2^22 on Linux, proc(5)) are never alive.
        let dead = LockOwner {
            host: host_tag(),
            pid: 4_999_999,
            since_unix: now_unix(),
        };
        std::fs::write(d.join(LOCK_FILE), serde_json::to_string(&dead).unwrap()).unwrap();
        assert_eq!(holder(&d, now_unix(), 600), Holder::Stale(dead));
        let Acquire::Acquired(l) = try_lock(&d, 600).unwrap() else {
            panic!("a stale lock must be reclaimed")
        };
        assert!(!d.join(RECLAIM_FILE).exists());
        drop(l);
        std::fs::remove_dir_all(&d).unwrap();
    }

    #[test]
    fn other_host_lock_binds_until_the_stale_limit() {
        let d = scratch("remote");
        std::fs::create_dir_all(&d).unwrap();
        let now = now_unix();
        let remote = LockOwner {
            host: "some-other-node".into(),
            pid: 1,
            since_unix: now - 100,
        };
        std::fs::write(d.join(LOCK_FILE), serde_json::to_string(&remote).unwrap()).unwrap();
        assert_eq!(holder(&d, now, 600), Holder::Live(remote.clone()));
        assert_eq!(holder(&d, now + 601, 600), Holder::Stale(remote.clone()));
        assert!(matches!(try_lock(&d, 600).unwrap(), Acquire::Busy(o) if o == remote));
        std::fs::remove_dir_all(&d).unwrap();
    }
}
