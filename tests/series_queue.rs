//! The results file queues series rows between snapshots and checkpoints; a run with few
//! of those (10⁶ steps between them) must not hold its whole series in memory. A counting
//! allocator measures the live heap while 20 × `SERIES_QUEUE_ROWS` rows are pushed with no
//! snapshot: the queue is written out when it is full, so the heap holds at most about
//! one queue's worth of rows. (A bound of this program's own design; no outside source.)

mod common;
mod counting;

use counting::{LIVE, PEAK};
use deepdry::output::diagnostics::SeriesRecord;
use deepdry::output::results::{ResultsFile, SERIES_QUEUE_ROWS};
use std::sync::atomic::Ordering;

#[global_allocator]
static ALLOC: counting::Counting = counting::Counting;

#[test]
fn queued_series_rows_are_written_out_when_the_queue_is_full() {
    let dir = std::env::temp_dir().join(format!("deepdry-series-queue-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("results.h5");
    let model = common::column(
        common::uniform_mesh(10.0, 20),
        common::sandy_loam(),
        common::dry_surface(300.0, 0.2),
        common::water_table(295.0),
        300.0,
        295.0,
        1e4 * common::YEAR,
    );
    let mut rf = ResultsFile::create(&path, &model, true).unwrap();
    let rows = 20 * SERIES_QUEUE_ROWS;
    let before = LIVE.load(Ordering::Relaxed);
    PEAK.store(before, Ordering::Relaxed);
    for k in 0..rows {
        rf.push_series(SeriesRecord {
            time_year: k as f64,
            dt: 1.0,
            ..Default::default()
        })
        .unwrap();
    }
    let peak = PEAK.load(Ordering::Relaxed) - before;
    let row = std::mem::size_of::<SeriesRecord>() + 8;
    eprintln!(
        "{rows} rows of {row} B: peak heap growth {peak} B ({:.0} B per row pushed)",
        peak as f64 / rows as f64
    );
    // All rows queued would need rows × row bytes; the queue holds one batch at a time
    // (its vectors may double once past a batch: 2 ×).
    assert!(
        peak < 2 * SERIES_QUEUE_ROWS * row + (1 << 18),
        "peak heap growth {peak} B for {rows} rows of {row} B"
    );
    assert!(rows * row > 2 * (2 * SERIES_QUEUE_ROWS * row + (1 << 18)));
    rf.flush().unwrap();
    drop(rf);
    let _ = std::fs::remove_dir_all(&dir);
}
