//! Atomic file writes: every result file is written to a temporary sibling and renamed into place,
//! so a crash or Ctrl-C never leaves a half-written file behind.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

/// Write `bytes` to `path` atomically (temp file in the same folder, fsync, rename).
/// Parent folders are created when missing.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    let dir = path.parent().filter(|p| !p.as_os_str().is_empty());
    if let Some(dir) = dir {
        std::fs::create_dir_all(dir)?;
    }
    let tmp = temp_sibling(path);
    {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
    }
    std::fs::rename(&tmp, path).inspect_err(|_| {
        let _ = std::fs::remove_file(&tmp);
    })
}

/// The temporary name used while `path` is being written: `.<name>.tmp-<host>-<pid>-<n>` beside it. Host, process
/// id and a per-process counter keep concurrent writers of the same file apart — threads of one process, and
/// processes on different nodes of a cluster sharing the results folder (their process ids may coincide).
pub fn temp_sibling(path: &Path) -> PathBuf {
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "out".into());
    let n = COUNTER.fetch_add(1, Ordering::Relaxed);
    let tmp_name = format!(".{name}.tmp-{}-{}-{n}", host_tag(), std::process::id());
    match path.parent() {
        Some(p) => p.join(tmp_name),
        None => PathBuf::from(tmp_name),
    }
}

/// Whether process `pid` exists on this machine. Reads `/proc/<pid>` (Linux); where `/proc` is not
/// mounted every process counts as alive, so callers fall back to their heartbeat rule.
pub fn pid_alive(pid: u32) -> bool {
    if !Path::new("/proc/self").exists() {
        return true;
    }
    Path::new("/proc").join(pid.to_string()).exists()
}

/// Remove temporary files left in `dir` by writers that died mid-write (see [`temp_sibling`]).
/// With `all`, every temp file goes (the caller holds the folder's lock, so no one else writes there);
/// otherwise only those of dead processes on this host. Returns how many were removed.
pub fn remove_stale_temps(dir: &Path, all: bool) -> std::io::Result<usize> {
    let entries = match std::fs::read_dir(dir) {
        Ok(e) => e,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(0),
        Err(e) => return Err(e),
    };
    let host = host_tag();
    let mut removed = 0;
    for e in entries {
        let e = e?;
        let name = e.file_name().to_string_lossy().into_owned();
        let Some((_, owner)) = name.strip_prefix('.').and_then(|n| n.rsplit_once(".tmp-")) else {
            continue;
        };
        let dead = || {
            // owner = `<host>-<pid>-<n>`; the host may itself contain `-`.
            let mut parts = owner.rsplitn(3, '-');
            let (_n, pid, h) = (parts.next(), parts.next(), parts.next());
            match (pid.and_then(|p| p.parse::<u32>().ok()), h) {
                (Some(pid), Some(h)) => h == host && !pid_alive(pid),
                _ => false,
            }
        };
        if all || dead() {
            match std::fs::remove_file(e.path()) {
                Ok(()) => removed += 1,
                Err(err) if err.kind() == std::io::ErrorKind::NotFound => {}
                Err(err) => return Err(err),
            }
        }
    }
    Ok(removed)
}

/// This machine's host name (letters, digits and `-` only), or `host` when it cannot be read.
pub fn host_tag() -> String {
    let raw = std::fs::read_to_string("/proc/sys/kernel/hostname")
        .or_else(|_| std::env::var("HOSTNAME"))
        .unwrap_or_default();
    let tag: String = raw
        .trim()
        .chars()
        .filter(|c| c.is_ascii_alphanumeric() || *c == '-')
        .take(32)
        .collect();
    if tag.is_empty() {
        "host".into()
    } else {
        tag
    }
}

/// FNV-1a 64-bit hash (stable across platforms and releases), as 16 hex digits.
pub fn fnv1a_hex(parts: &[&[u8]]) -> String {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for p in parts {
        for b in *p {
            h ^= *b as u64;
            h = h.wrapping_mul(0x0000_0100_0000_01b3);
        }
        h ^= 0xff;
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    format!("{h:016x}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn atomic_write_replaces_and_leaves_no_temp() {
        let dir = std::env::temp_dir().join(format!("termwise-fsio-{}", std::process::id()));
        let p = dir.join("sub").join("a.txt");
        write_atomic(&p, b"one").unwrap();
        write_atomic(&p, b"two").unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"two");
        let leftovers: Vec<_> = std::fs::read_dir(p.parent().unwrap())
            .unwrap()
            .filter_map(|e| e.ok())
            .filter(|e| e.file_name().to_string_lossy().contains(".tmp-"))
            .collect();
        assert!(leftovers.is_empty());
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn stale_temps_of_dead_writers_are_removed() {
        let dir = std::env::temp_dir().join(format!("termwise-fsio-stale-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let host = host_tag();
        // Process ids above the kernel's pid_max (at most 2^22 on Linux, proc(5)) are never alive.
        let dead = dir.join(format!(".run.json.tmp-{host}-4999999-0"));
        let mine = dir.join(format!(".run.json.tmp-{host}-{}-7", std::process::id()));
        let other_host = dir.join(".run.json.tmp-elsewhere-4999999-0");
        for p in [&dead, &mine, &other_host] {
            std::fs::write(p, b"x").unwrap();
        }
        std::fs::write(dir.join("run.json"), b"{}").unwrap();
        assert_eq!(remove_stale_temps(&dir, false).unwrap(), 1);
        assert!(!dead.exists() && mine.exists() && other_host.exists());
        assert_eq!(remove_stale_temps(&dir, true).unwrap(), 2);
        assert!(dir.join("run.json").exists());
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn concurrent_writers_of_one_file_never_leave_it_partial() {
        // Many writers replace the same file at once (as array tasks do with study.json) while a reader
        // checks that every read is one whole version: rename(2) replaces a name atomically (POSIX.1-2017,
        // rename(), "the link named new shall remain visible to other processes throughout").
        let dir = std::env::temp_dir().join(format!("termwise-fsio-conc-{}", std::process::id()));
        let p = dir.join("study.json");
        let body = |w: usize| {
            format!(
                "{{\"writer\": {w}, \"pad\": \"{}\"}}",
                "x".repeat(20_000 + w)
            )
        };
        write_atomic(&p, body(0).as_bytes()).unwrap();
        let stop = std::sync::atomic::AtomicBool::new(false);
        std::thread::scope(|s| {
            let writers: Vec<_> = (1..=6)
                .map(|w| {
                    let p = &p;
                    s.spawn(move || {
                        for _ in 0..40 {
                            write_atomic(p, body(w).as_bytes()).unwrap();
                        }
                    })
                })
                .collect();
            let reader = s.spawn(|| {
                let mut reads = 0;
                while !stop.load(Ordering::SeqCst) {
                    let text = std::fs::read_to_string(&p).unwrap();
                    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
                    let w = v["writer"].as_u64().unwrap() as usize;
                    assert_eq!(text, body(w));
                    reads += 1;
                }
                reads
            });
            for w in writers {
                w.join().unwrap();
            }
            stop.store(true, Ordering::SeqCst);
            assert!(reader.join().unwrap() > 0);
        });
        let leftovers = std::fs::read_dir(&dir)
            .unwrap()
            .filter_map(|e| e.ok())
            .filter(|e| e.file_name().to_string_lossy().contains(".tmp-"))
            .count();
        assert_eq!(leftovers, 0);
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
