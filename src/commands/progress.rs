//! Progress on a terminal: the bar of `run` and `verify` while fitting (or
//! simulating), and a byte count while a large table is read.
//!
//! Callers create these only when stderr is a terminal and `--quiet` is not
//! given (`progress_wanted`); otherwise nothing here draws, so piped and
//! logged stderr stays exactly as it was. The counting and the estimate of
//! time left are plain functions, tested without a terminal.

use std::cell::OnceCell;
use std::sync::Mutex;
use std::time::Duration;

use indicatif::{FormattedDuration, ProgressBar, ProgressState, ProgressStyle};

/// How often a bar is redrawn when nothing finishes, so that the elapsed
/// time and the estimate keep moving during long fits.
const TICK: Duration = Duration::from_millis(200);

/// Tables at least this large (5 MiB) show their reading; smaller ones are
/// read before a bar would be seen.
pub(super) const LARGE_TABLE: u64 = 5 << 20;

/// Units finished so far, computed and cached apart: cached units cost
/// nothing, so the bar runs over the units that must really be computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Tally {
    pub(super) total: u64,
    pub(super) computed: u64,
    pub(super) cached: u64,
}

impl Tally {
    pub(super) fn new(total: u64) -> Self {
        Tally {
            total,
            computed: 0,
            cached: 0,
        }
    }

    /// Counts one finished unit.
    pub(super) fn record(&mut self, cached: bool) {
        if cached {
            self.cached += 1;
        } else {
            self.computed += 1;
        }
    }

    /// The units computed or still to compute: every unit not finished yet
    /// may need computing, and none found in the cache does.
    pub(super) fn workload(&self) -> u64 {
        self.total.saturating_sub(self.cached)
    }
}

/// The time left if the units still to do go at the pace of those done:
/// `None` before the first is done, when there is no pace to go by.
pub(super) fn time_left(elapsed: Duration, done: u64, to_do: u64) -> Option<Duration> {
    if done == 0 {
        return None;
    }
    let remaining = to_do.saturating_sub(done);
    // Whole milliseconds are as fine as the display; u128 cannot overflow.
    let millis = elapsed.as_millis() * u128::from(remaining) / u128::from(done);
    Some(Duration::from_millis(
        u64::try_from(millis).unwrap_or(u64::MAX),
    ))
}

/// The `{left}` key of the templates below: the estimate from the bar's own
/// position, length and elapsed time, redrawn on every tick.
fn left_key(state: &ProgressState, w: &mut dyn std::fmt::Write) {
    if state.is_finished() {
        let _ = write!(w, "done");
        return;
    }
    let to_do = state.len().unwrap_or(0);
    let _ = match time_left(state.elapsed(), state.pos(), to_do) {
        Some(left) => write!(w, "about {} left", FormattedDuration(left)),
        None => write!(w, "time left not known yet"),
    };
}

/// A bar on stderr with the house template `template`.
fn bar(length: u64, template: &str) -> ProgressBar {
    let style = ProgressStyle::with_template(template)
        .expect("the progress templates are fixed and valid")
        .with_key("left", left_key)
        .progress_chars("=> ");
    let bar = ProgressBar::new(length).with_style(style);
    bar.enable_steady_tick(TICK);
    bar
}

/// The bar of one evaluation: `{what}: N/M {units} computed, K cached`,
/// where M is what is left to compute once cached units are set apart.
pub(super) struct WorkProgress {
    units: &'static str,
    tally: Mutex<Tally>,
    bar: Option<ProgressBar>,
}

impl WorkProgress {
    /// Draws only when `show` is set; counts either way.
    pub(super) fn new(what: &str, total: usize, units: &'static str, show: bool) -> Self {
        let total = total as u64;
        let bar = show.then(|| {
            let bar = bar(
                total,
                "{prefix}: [{bar:24}] {pos}/{len} {msg} | {elapsed_precise} elapsed, {left}",
            )
            .with_prefix(what.to_owned());
            bar.set_message(format!("{units} computed, 0 cached"));
            bar
        });
        WorkProgress {
            units,
            tally: Mutex::new(Tally::new(total)),
            bar,
        }
    }

    /// Counts one finished unit; called from any worker thread. The bar is
    /// updated under the lock, so what it shows never goes backwards.
    pub(super) fn record(&self, cached: bool) {
        let mut tally = self.tally.lock().unwrap_or_else(|e| e.into_inner());
        tally.record(cached);
        if let Some(bar) = &self.bar {
            bar.set_length(tally.workload());
            bar.set_position(tally.computed);
            if cached {
                bar.set_message(format!("{} computed, {} cached", self.units, tally.cached));
            }
        }
    }

    /// Leaves the last state on screen after success (it tells how long the
    /// work took); clears it after a failure, so the error stands alone.
    pub(super) fn finish(&self, succeeded: bool) {
        if let Some(bar) = &self.bar {
            if succeeded {
                bar.finish();
            } else {
                bar.finish_and_clear();
            }
        }
    }
}

/// Byte progress while a table is read, drawn only once the table turns out
/// to be large ([`LARGE_TABLE`]), and only when `show` is set.
pub(super) struct TableProgress {
    name: String,
    show: bool,
    bar: OnceCell<Option<ProgressBar>>,
}

impl TableProgress {
    pub(super) fn new(name: &str, show: bool) -> Self {
        TableProgress {
            name: name.to_owned(),
            show,
            bar: OnceCell::new(),
        }
    }

    /// The `on_read(parsed, total)` hook of `data::load`.
    pub(super) fn update(&self, parsed: u64, total: u64) {
        let bar = self.bar.get_or_init(|| {
            (self.show && total >= LARGE_TABLE).then(|| {
                let bar = bar(
                    total,
                    "reading {prefix}: [{bar:24}] {bytes}/{total_bytes} | \
                     {elapsed_precise} elapsed, {left}",
                );
                bar.set_prefix(self.name.clone());
                bar
            })
        });
        if let Some(bar) = bar {
            bar.set_position(parsed);
        }
    }

    /// As [`WorkProgress::finish`].
    pub(super) fn finish(&self, succeeded: bool) {
        if let Some(Some(bar)) = self.bar.get() {
            if succeeded {
                bar.finish();
            } else {
                bar.finish_and_clear();
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cached_units_are_counted_apart_from_the_work() {
        let mut tally = Tally::new(10);
        assert_eq!(tally.workload(), 10);
        // Completion order as rayon may report it: cache hits in between.
        for cached in [true, false, true, true, false] {
            tally.record(cached);
        }
        assert_eq!(
            tally,
            Tally {
                total: 10,
                computed: 2,
                cached: 3
            }
        );
        // 2 of 7 computed: the three cached never enter the bar.
        assert_eq!(tally.workload(), 7);
        for _ in 0..5 {
            tally.record(true);
        }
        assert_eq!((tally.computed, tally.workload()), (2, 2));
    }

    #[test]
    fn everything_from_the_cache_leaves_nothing_to_compute() {
        let mut tally = Tally::new(4);
        for _ in 0..4 {
            tally.record(true);
        }
        assert_eq!((tally.computed, tally.cached, tally.workload()), (0, 4, 0));
    }

    #[test]
    fn time_left_follows_the_pace_so_far() {
        let ten = Duration::from_secs(10);
        assert_eq!(time_left(ten, 0, 8), None);
        assert_eq!(time_left(ten, 2, 8), Some(Duration::from_secs(30)));
        assert_eq!(time_left(ten, 8, 8), Some(Duration::ZERO));
        // A length that shrank below the position (cache hits) is done.
        assert_eq!(time_left(ten, 5, 3), Some(Duration::ZERO));
        assert_eq!(
            time_left(Duration::from_millis(1500), 3, 4),
            Some(Duration::from_millis(500))
        );
    }

    #[test]
    fn small_tables_and_hidden_progress_draw_no_bar() {
        let small = TableProgress::new("t.csv", true);
        small.update(0, LARGE_TABLE - 1);
        small.update(LARGE_TABLE - 1, LARGE_TABLE - 1);
        assert!(matches!(small.bar.get(), Some(None)));
        let hidden = TableProgress::new("t.csv", false);
        hidden.update(0, 10 * LARGE_TABLE);
        assert!(matches!(hidden.bar.get(), Some(None)));
        let work = WorkProgress::new("fitting", 3, "fits", false);
        work.record(true);
        work.record(false);
        assert!(work.bar.is_none());
        assert_eq!(work.tally.lock().unwrap().workload(), 2);
    }
}
