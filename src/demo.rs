//! A live demo run: a synthetic tarn run written progressively into a fresh temporary
//! directory by a background thread, for `settle demo` and for tests of the live path.
//!
//! The writer behaves like a solver whose output is redirected to a file: the banner
//! appears at once, then steps are produced at the requested rate and reach the files in
//! block-buffered chunks that often end mid-line, with an occasional timed flush. It sleeps
//! on a channel between steps, so it never busy-waits and stops as soon as it is told to.
//! The bytes it writes are exactly those of [`crate::synth::write_tarn_log`] and
//! [`crate::synth::write_forces_csv`] for the same run.

use std::fs::{self, File, OpenOptions};
use std::io::{self, Write};
use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::{AtomicU64, AtomicUsize, Ordering};
use std::sync::mpsc::{self, Receiver, RecvTimeoutError, Sender};
use std::thread::JoinHandle;
use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

use crate::synth::rng::Rng;
use crate::synth::{self, Scenario, SynthRun};

/// Iterations per second of `settle demo` unless told otherwise.
pub const DEFAULT_RATE: f64 = 40.0;

/// The demo's files; the directory and everything in it is removed on drop.
#[derive(Debug)]
pub struct DemoRun {
    /// A fresh directory under the system temporary directory.
    pub dir: PathBuf,
    /// `dir/tarn.log`.
    pub log: PathBuf,
    /// `dir/forces.csv`.
    pub forces: PathBuf,
    /// `dir/settle.toml`: names the run and its two sources.
    pub config: PathBuf,
    pub scenario: Scenario,
    pub seed: u64,
    pub case: String,
    /// Steps the run will have when complete.
    pub steps: usize,
}

impl Drop for DemoRun {
    fn drop(&mut self) {
        let _ = fs::remove_dir_all(&self.dir);
    }
}

/// The background writer of a [`DemoRun`]. Dropping it stops the thread and waits for it.
#[derive(Debug)]
pub struct DemoWriter {
    stop: Option<Sender<()>>,
    handle: Option<JoinHandle<io::Result<()>>>,
    done: Arc<AtomicUsize>,
    total: usize,
}

impl DemoWriter {
    /// Steps the solver has produced so far (some may still sit in its output buffer).
    pub fn steps_done(&self) -> usize {
        self.done.load(Ordering::Relaxed)
    }

    /// Steps of the complete run.
    pub fn total_steps(&self) -> usize {
        self.total
    }

    /// The thread has ended (run complete, stopped, or failed).
    pub fn is_finished(&self) -> bool {
        self.handle.as_ref().is_none_or(JoinHandle::is_finished)
    }

    /// Stop writing now (like a killed job: buffered output is lost) and wait for the
    /// thread; returns the first write error, if any.
    pub fn stop(mut self) -> io::Result<()> {
        self.shutdown()
    }

    /// Wait until the whole run has been written.
    pub fn wait(mut self) -> io::Result<()> {
        let result = match self.handle.take() {
            Some(h) => join(h),
            None => Ok(()),
        };
        self.stop = None;
        result
    }

    fn shutdown(&mut self) -> io::Result<()> {
        if let Some(tx) = self.stop.take() {
            let _ = tx.send(());
        }
        match self.handle.take() {
            Some(h) => join(h),
            None => Ok(()),
        }
    }
}

impl Drop for DemoWriter {
    fn drop(&mut self) {
        let _ = self.shutdown();
    }
}

fn join(h: JoinHandle<io::Result<()>>) -> io::Result<()> {
    h.join().unwrap_or_else(|_| Err(io::Error::other("demo writer thread panicked")))
}

/// Start the demo run of `scenario` and `seed`, written at `rate` iterations per second.
pub fn start(scenario: Scenario, seed: u64, rate: f64) -> io::Result<(DemoRun, DemoWriter)> {
    start_run(synth::generate(scenario, seed), rate)
}

/// Start writing a given synthetic run (for instance a short one from
/// [`synth::generate_with`]) at `rate` iterations per second.
pub fn start_run(run: SynthRun, rate: f64) -> io::Result<(DemoRun, DemoWriter)> {
    if !(rate.is_finite() && rate > 0.0) {
        return Err(io::Error::new(
            io::ErrorKind::InvalidInput,
            format!("demo rate must be a positive number of iterations per second, got {rate}"),
        ));
    }
    let dir = fresh_dir()?;
    let demo = DemoRun {
        log: dir.join("tarn.log"),
        forces: dir.join("forces.csv"),
        config: dir.join("settle.toml"),
        dir,
        scenario: run.scenario,
        seed: run.seed,
        case: run.case.clone(),
        steps: run.steps.len(),
    };
    fs::write(&demo.config, synth::settle_toml(&run.case))?;
    let log = File::create(&demo.log)?;
    let forces = File::create(&demo.forces)?;
    drop((log, forces));
    let log = OpenOptions::new().append(true).open(&demo.log)?;
    let forces = OpenOptions::new().append(true).open(&demo.forces)?;

    let (tx, rx) = mpsc::channel();
    let done = Arc::new(AtomicUsize::new(0));
    let total = run.steps.len();
    let thread_done = Arc::clone(&done);
    let handle = std::thread::Builder::new()
        .name("settle-demo".into())
        .spawn(move || write_live(&run, rate, log, forces, &rx, &thread_done))?;
    Ok((demo, DemoWriter { stop: Some(tx), handle: Some(handle), done, total }))
}

/// A unique new directory: pid, time and a process-wide counter in the name.
fn fresh_dir() -> io::Result<PathBuf> {
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let nanos = SystemTime::now().duration_since(UNIX_EPOCH).map_or(0, |d| d.as_nanos());
    loop {
        let n = COUNTER.fetch_add(1, Ordering::Relaxed);
        let dir =
            std::env::temp_dir().join(format!("settle-demo-{}-{nanos}-{n}", std::process::id()));
        match fs::create_dir(&dir) {
            Ok(()) => return Ok(dir),
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists => continue,
            Err(e) => return Err(e),
        }
    }
}

/// A solver's block-buffered output stream to one file.
struct Buffered {
    file: File,
    pending: Vec<u8>,
    /// Buffer size: a full buffer is written out at once, cutting lines anywhere.
    chunk: usize,
    /// A non-empty buffer is flushed at the latest this long after the last write.
    latency: Duration,
    last: Instant,
}

impl Buffered {
    fn new(file: File, chunk: usize, latency: Duration) -> Self {
        Buffered { file, pending: Vec::new(), chunk, latency, last: Instant::now() }
    }

    fn push(&mut self, text: &str) {
        self.pending.extend_from_slice(text.as_bytes());
    }

    fn write(&mut self, n: usize) -> io::Result<()> {
        self.file.write_all(&self.pending[..n])?;
        self.pending.drain(..n);
        self.last = Instant::now();
        Ok(())
    }

    /// Write full buffers; on a timed flush, sometimes stop mid-line as a solver does when
    /// its runtime flushes while a line is half formatted.
    fn pump(&mut self, rng: &mut Rng) -> io::Result<()> {
        while self.pending.len() >= self.chunk {
            self.write(self.chunk)?;
        }
        if !self.pending.is_empty() && self.last.elapsed() >= self.latency {
            let n = if rng.chance(0.3) && self.pending.len() > 1 {
                1 + (rng.next_u64() % (self.pending.len() as u64 - 1)) as usize
            } else {
                self.pending.len()
            };
            self.write(n)?;
        }
        Ok(())
    }

    fn flush_all(&mut self) -> io::Result<()> {
        let n = self.pending.len();
        if n > 0 { self.write(n) } else { Ok(()) }
    }

    /// When the next timed flush is due, if anything is pending.
    fn deadline(&self) -> Option<Instant> {
        (!self.pending.is_empty()).then(|| self.last + self.latency)
    }
}

fn write_live(
    run: &SynthRun,
    rate: f64,
    log: File,
    forces: File,
    stop: &Receiver<()>,
    done: &AtomicUsize,
) -> io::Result<()> {
    let mut rng = Rng::new(run.seed ^ 0xDE30_0000_0000_0001);
    let log_chunk = rng.pick(&[1024usize, 2048, 4096]);
    let log_latency = Duration::from_millis(rng.int_range(400, 1000) as u64);
    let csv_chunk = rng.pick(&[256usize, 512]);
    let csv_latency = Duration::from_millis(rng.int_range(500, 1500) as u64);
    let mut log = Buffered::new(log, log_chunk, log_latency);
    let mut csv = Buffered::new(forces, csv_chunk, csv_latency);

    log.push(&synth::render_banner(run));
    log.flush_all()?;
    csv.push(&synth::csv_header(run));
    csv.flush_all()?;

    let start = Instant::now();
    let total = run.steps.len();
    let mut k = 0usize;
    loop {
        let due = ((start.elapsed().as_secs_f64() * rate) as usize).min(total);
        while k < due {
            log.push(&synth::render_step(run, k));
            if let Some(row) = synth::csv_row(run, k) {
                csv.push(&row);
            }
            k += 1;
            done.store(k, Ordering::Relaxed);
        }
        if k == total {
            log.push(&synth::render_end(run));
            log.flush_all()?;
            return csv.flush_all();
        }
        log.pump(&mut rng)?;
        csv.pump(&mut rng)?;
        let next_step = start + Duration::from_secs_f64((k + 1) as f64 / rate);
        let mut wake = next_step;
        for d in [log.deadline(), csv.deadline()].into_iter().flatten() {
            wake = wake.min(d);
        }
        let wait = wake.saturating_duration_since(Instant::now()).max(Duration::from_millis(1));
        match stop.recv_timeout(wait) {
            Err(RecvTimeoutError::Timeout) => {}
            Ok(()) | Err(RecvTimeoutError::Disconnected) => return Ok(()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rejects_bad_rates() {
        for rate in [0.0, -1.0, f64::NAN, f64::INFINITY] {
            let err = start(Scenario::Converging, 1, rate).expect_err("bad rate");
            assert_eq!(err.kind(), io::ErrorKind::InvalidInput);
        }
    }
}
