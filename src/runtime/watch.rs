//! File watching for hot reload: the folders of the model and rules files are watched (so a file renamed over the old one is seen), changes are flagged per target, and a pure `Debouncer` turns bursts of changes into one reload per target.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use notify::event::{AccessKind, AccessMode};
use notify::{Event, EventKind, RecommendedWatcher, RecursiveMode, Watcher};
use tokio::sync::Notify;

/// What a reload concerns.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Target {
    Model,
    Rules,
}

impl Target {
    pub const ALL: [Target; 2] = [Target::Model, Target::Rules];

    /// The metric label and JSON key.
    pub fn name(self) -> &'static str {
        match self {
            Target::Model => "model",
            Target::Rules => "rules",
        }
    }

    fn index(self) -> usize {
        self as usize
    }
}

/// A burst that keeps going is reloaded after this many quiet periods anyway.
pub const MAX_DELAY_FACTOR: u32 = 10;

/// Trailing-edge debounce per target: a change schedules a reload `quiet`
/// after it, and every further change pushes it back, up to `MAX_DELAY_FACTOR
/// × quiet` after the first change of the burst. Pure: time comes in as values.
#[derive(Debug, Clone)]
pub struct Debouncer {
    quiet: Duration,
    /// Per target: (first change of the pending burst, when it is due).
    pending: [Option<(Instant, Instant)>; 2],
}

impl Debouncer {
    pub fn new(quiet: Duration) -> Debouncer {
        Debouncer { quiet, pending: [None, None] }
    }

    /// A change to `target` seen at `now`.
    pub fn note(&mut self, target: Target, now: Instant) {
        let slot = &mut self.pending[target.index()];
        let first = slot.map_or(now, |(first, _)| first);
        let due = (now + self.quiet).min(first + self.quiet * MAX_DELAY_FACTOR);
        *slot = Some((first, due));
    }

    /// The earliest pending reload, if any.
    pub fn next_due(&self) -> Option<Instant> {
        self.pending.iter().flatten().map(|&(_, due)| due).min()
    }

    /// The targets due at `now`, in `Target::ALL` order; they are no longer pending.
    pub fn take_due(&mut self, now: Instant) -> Vec<Target> {
        let mut out = Vec::new();
        for t in Target::ALL {
            if let Some((_, due)) = self.pending[t.index()] {
                if due <= now {
                    self.pending[t.index()] = None;
                    out.push(t);
                }
            }
        }
        out
    }
}

/// Set by the watcher thread, taken by the reload coordinator.
#[derive(Debug, Default)]
pub struct WatchFlags {
    changed: [AtomicBool; 2],
    pub wake: Notify,
}

impl WatchFlags {
    pub fn set(&self, target: Target) {
        self.changed[target.index()].store(true, Ordering::SeqCst);
        self.wake.notify_one();
    }

    /// Whether `target` changed since the last call.
    pub fn take(&self, target: Target) -> bool {
        self.changed[target.index()].swap(false, Ordering::SeqCst)
    }
}

/// A watched file: its folder and its name in it.
#[derive(Debug, Clone, PartialEq, Eq)]
struct Watched {
    target: Target,
    dir: PathBuf,
    name: std::ffi::OsString,
}

impl Watched {
    fn new(target: Target, path: &Path) -> std::io::Result<Watched> {
        let abs = std::path::absolute(path)?;
        let name = abs.file_name().map(|n| n.to_os_string()).ok_or_else(|| {
            std::io::Error::new(std::io::ErrorKind::InvalidInput, format!("{} names no file", path.display()))
        })?;
        let dir = abs.parent().map(Path::to_path_buf).unwrap_or_else(|| PathBuf::from("/"));
        Ok(Watched { target, dir, name })
    }

    fn is(&self, path: &Path) -> bool {
        path.file_name() == Some(self.name.as_os_str()) && path.parent() == Some(self.dir.as_path())
    }
}

/// Whether an event can mean new file contents: anything but reads and opens.
fn is_change(kind: &EventKind) -> bool {
    match kind {
        EventKind::Access(AccessKind::Close(AccessMode::Write)) => true,
        EventKind::Access(_) => false,
        _ => true,
    }
}

/// The running watcher; dropping it stops watching.
pub struct FileWatch {
    _watcher: RecommendedWatcher,
    pub flags: Arc<WatchFlags>,
}

/// Watch the folders of `files` (target, path) and flag changes to those files.
pub fn watch(files: &[(Target, &Path)]) -> Result<FileWatch, WatchError> {
    let watched: Vec<Watched> = files
        .iter()
        .map(|(t, p)| Watched::new(*t, p).map_err(|e| WatchError { path: p.display().to_string(), reason: e.to_string() }))
        .collect::<Result<_, _>>()?;
    let flags = Arc::new(WatchFlags::default());
    let (w, f) = (watched.clone(), flags.clone());
    let mut watcher = notify::recommended_watcher(move |res: notify::Result<Event>| match res {
        Ok(ev) if is_change(&ev.kind) => {
            for x in w.iter().filter(|x| ev.paths.iter().any(|p| x.is(p))) {
                f.set(x.target);
            }
        }
        Ok(_) => {}
        Err(e) => tracing::warn!("file watcher: {e}"),
    })
    .map_err(|e| WatchError { path: String::new(), reason: e.to_string() })?;
    let mut dirs: Vec<&Path> = watched.iter().map(|x| x.dir.as_path()).collect();
    dirs.sort();
    dirs.dedup();
    for d in dirs {
        watcher
            .watch(d, RecursiveMode::NonRecursive)
            .map_err(|e| WatchError { path: d.display().to_string(), reason: e.to_string() })?;
    }
    Ok(FileWatch { _watcher: watcher, flags })
}

/// The watcher could not start.
#[derive(Debug, thiserror::Error)]
#[error("cannot watch {path} for reloads: {reason} (set reload.watch = false to reload by SIGHUP or POST /reload only)")]
pub struct WatchError {
    pub path: String,
    pub reason: String,
}

#[cfg(test)]
mod tests {
    use super::*;

    const Q: Duration = Duration::from_millis(100);

    #[test]
    fn a_burst_is_one_reload_after_the_last_change() {
        let t0 = Instant::now();
        let mut d = Debouncer::new(Q);
        assert_eq!(d.next_due(), None);
        d.note(Target::Rules, t0);
        d.note(Target::Rules, t0 + Duration::from_millis(60));
        d.note(Target::Rules, t0 + Duration::from_millis(120));
        assert_eq!(d.next_due(), Some(t0 + Duration::from_millis(220)));
        assert!(d.take_due(t0 + Duration::from_millis(219)).is_empty(), "still inside the quiet time");
        assert_eq!(d.take_due(t0 + Duration::from_millis(220)), [Target::Rules]);
        assert_eq!(d.next_due(), None, "taken once");
        assert!(d.take_due(t0 + Duration::from_secs(5)).is_empty());
    }

    #[test]
    fn targets_are_debounced_apart_and_taken_in_order() {
        let t0 = Instant::now();
        let mut d = Debouncer::new(Q);
        d.note(Target::Rules, t0);
        d.note(Target::Model, t0 + Duration::from_millis(50));
        assert_eq!(d.next_due(), Some(t0 + Q));
        assert_eq!(d.take_due(t0 + Q), [Target::Rules]);
        assert_eq!(d.next_due(), Some(t0 + Duration::from_millis(150)));
        d.note(Target::Rules, t0 + Duration::from_millis(140));
        assert_eq!(d.take_due(t0 + Duration::from_secs(1)), [Target::Model, Target::Rules]);
    }

    #[test]
    fn a_file_that_never_settles_is_reloaded_after_the_maximum_delay() {
        let t0 = Instant::now();
        let mut d = Debouncer::new(Q);
        let mut now = t0;
        let mut reloaded_at = None;
        // A change every 50 ms, for 3 s: never quiet for 100 ms.
        while now < t0 + Duration::from_secs(3) {
            d.note(Target::Model, now);
            if !d.take_due(now).is_empty() {
                reloaded_at.get_or_insert(now);
            }
            now += Duration::from_millis(50);
        }
        assert_eq!(reloaded_at, Some(t0 + Q * MAX_DELAY_FACTOR), "due at the cap, then taken");
    }

    #[test]
    fn only_changes_to_the_watched_names_in_the_watched_folder_count() {
        let w = Watched::new(Target::Rules, Path::new("/srv/sieveline/rules.toml")).unwrap();
        assert!(w.is(Path::new("/srv/sieveline/rules.toml")));
        assert!(!w.is(Path::new("/srv/sieveline/rules.toml.tmp")), "the temp file of an atomic write");
        assert!(!w.is(Path::new("/srv/other/rules.toml")));
        assert!(is_change(&EventKind::Modify(notify::event::ModifyKind::Any)));
        assert!(is_change(&EventKind::Access(AccessKind::Close(AccessMode::Write))));
        assert!(!is_change(&EventKind::Access(AccessKind::Open(AccessMode::Any))));
    }

    #[test]
    fn flags_are_taken_once() {
        let f = WatchFlags::default();
        f.set(Target::Model);
        assert!(f.take(Target::Model));
        assert!(!f.take(Target::Model));
        assert!(!f.take(Target::Rules));
    }
}
