//! Prefetching: a load source driven on a second thread while the engine steps.
//!
//! [`scoped`] lends a source to a producer thread of a [`std::thread::scope`] and hands
//! the caller a [`Prefetch`], itself a [`LoadSource`], for the length of a closure (a
//! run). The producer makes the same calls of the inner source's
//! [`LoadSource::fill`] that the engine would make, in the same order and with the same
//! arguments, so every sample is the same bits; it only makes them ahead of time. The
//! run then takes about the longer of the generator's time and the engine's, not their
//! sum.
//!
//! # What the producer assumes of its caller
//!
//! The engine asks for chunks: `fill(k, …, out, stop_at_hold)` with `out.len()` the
//! chunk length or what is left of the run, at k = the end of the chunk before, and asks
//! [`LoadSource::unchanged_until`] only of a chunk's last interval. A request tells the
//! producer the grid (t_first, Δt), the flag and the chunk length; from then on
//! it fills chunk after chunk at k, k + got, …, with length min(that length, n − k),
//! asks the inner source for the promise of each chunk's last interval right after
//! filling it (the call reads the source and changes nothing) and ships the promise with
//! the chunk. It stops and waits for the next request when a chunk ends in a hold
//! (`stop_at_hold` and a promise past the chunk's end: the next request may come at any
//! interval inside the hold), when a fill reports an error (shipped as the pair the
//! engine would have received: the samples before it, then the error), when a fill
//! gives no sample, and at the end of the run.
//!
//! [`Prefetch::fill`] hands out the next shipped chunk when it is the one asked for
//! (same k, length, grid and flag), copying its samples into the caller's slice
//! ([`Prefetch::fill_owned`], which the engine calls, swaps the chunk's buffer for the
//! engine's instead, and the producer fills the engine's old buffer later), and
//! otherwise, when the producer is waiting, asks it for that fill and waits for the
//! answer (this happens after holds). A request that differs from a chunk already made
//! ahead cannot be answered with the same bits (the inner source has moved on) and is
//! reported as [`ProfileError::Sequence`]. [`Prefetch::unchanged_until`] gives the
//! shipped promise for the last interval of the chunk handed out last, and k + 1 (no
//! promise) for any other; [`Prefetch::sample`] is a one-sample request answered at
//! once.
//!
//! # When it pays
//!
//! A chunk that ends in a hold costs a round trip between the threads (microseconds,
//! more when the producer has to be woken), far more than the generator takes for a
//! chunk of a few samples; [`crate::study::Study::run`] therefore prefetches only when
//! the engine takes whole chunks. The two threads together use more processor time than
//! one (the samples cross from one core's cache to the other's): the gain is in wall
//! time, on a machine with a core to spare.
//!
//! # Batches
//!
//! A wake-up of the other thread costs microseconds, so chunks travel in batches of up
//! to [`BATCH_CHUNKS`] (the answer to a request goes out alone, at once, and the batches
//! after it double in size up to that). [`BATCHES`] batches circulate: the engine sends
//! each one back when it is done with it, and the producer refills it, so the steady
//! state allocates nothing, and the producer waits when it is that far ahead. The
//! channels are bounded (their slots are allocated once).
//!
//! # Ending
//!
//! The producer lives inside the scope of [`scoped`], which joins it before returning.
//! When the closure returns (at the end of the run, or early on an error) the
//! [`Prefetch`] is dropped, which closes the channels; the producer, waiting on one of
//! them or finding it closed after its next fill, returns. If the thread cannot be
//! started, the closure gets a [`Prefetch`] that calls the source directly.

use super::{LoadSample, LoadSource};
use crate::error::ProfileError;
use std::sync::mpsc::{sync_channel, Receiver, SyncSender};

/// Most chunks in one batch handed from the producer to the engine: 64 chunks of 256
/// samples, about 0.8 MB. Batches of 16 chunks woke the other thread four times as often,
/// and the wake-ups showed in the engine's time (the year bench about 2 ns per interval
/// slower); 128 measured no better than 64.
pub const BATCH_CHUNKS: usize = 64;

/// Batches in circulation between the two threads.
pub const BATCHES: usize = 4;

/// What a chunk answers: the arguments of the call that made it. Times are compared by
/// their bits.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Key {
    /// `fill(k, t_first, dt, out[..len], stop_at_hold)`.
    Fill {
        k: u64,
        len: usize,
        t_first_bits: u64,
        dt_bits: u64,
        stop_at_hold: bool,
    },
    /// `sample(k, t, …)`.
    Sample { k: u64, t_bits: u64 },
}

impl Key {
    fn fill(k: u64, len: usize, t_first_s: f64, dt_s: f64, stop_at_hold: bool) -> Key {
        Key::Fill {
            k,
            len,
            t_first_bits: t_first_s.to_bits(),
            dt_bits: dt_s.to_bits(),
            stop_at_hold,
        }
    }

    fn k(&self) -> u64 {
        match *self {
            Key::Fill { k, .. } | Key::Sample { k, .. } => k,
        }
    }

    /// How many samples the call asks for.
    fn len(&self) -> usize {
        match *self {
            Key::Fill { len, .. } => len,
            Key::Sample { .. } => 1,
        }
    }
}

/// One call's result, as shipped.
#[derive(Debug)]
struct Chunk {
    /// The call.
    key: Key,
    /// How many samples it gave.
    got: usize,
    /// The inner source's promise for its last interval (when `got` > 0).
    until: u64,
    /// The error that ended it.
    err: Option<ProfileError>,
    /// Whether the producer goes on to the next chunk without being asked.
    more: bool,
}

/// Chunks made one after the other, each in a buffer of its own (chunk i in `bufs[i]`),
/// so that the engine can take a chunk's buffer in exchange for its own instead of
/// copying the samples ([`LoadSource::fill_owned`]).
#[derive(Debug, Default)]
struct Batch {
    /// The chunks' buffers, and spare ones for the next use of the batch; a buffer only
    /// grows, so that a batch used again is not written twice.
    bufs: Vec<Vec<LoadSample>>,
    chunks: Vec<Chunk>,
}

impl Batch {
    fn clear(&mut self) {
        self.chunks.clear();
    }

    /// The room for the next chunk's `len` samples (its buffer, grown when shorter: once
    /// per buffer in the steady state).
    fn room(&mut self, len: usize) -> &mut [LoadSample] {
        let i = self.chunks.len();
        if self.bufs.len() <= i {
            self.bufs.push(Vec::new());
        }
        let buf = &mut self.bufs[i];
        if buf.len() < len {
            buf.resize(len, LoadSample::default());
        }
        &mut buf[..len]
    }
}

/// What the engine side asks of a waiting producer.
enum Request {
    Fill {
        k: u64,
        len: usize,
        t_first_s: f64,
        dt_s: f64,
        stop_at_hold: bool,
    },
    Sample {
        k: u64,
        t_s: f64,
    },
}

/// A load source whose samples are made ahead on a second thread (see the module
/// documentation), or, when no thread could be started, the source itself.
pub struct Prefetch<'a, S: ?Sized> {
    mode: Mode<'a, S>,
}

enum Mode<'a, S: ?Sized> {
    Direct(&'a mut S),
    Threaded(Consumer),
}

impl<S: ?Sized> Prefetch<'_, S> {
    /// Whether the samples come from a second thread (false when it could not be
    /// started and the source is called directly).
    pub fn is_threaded(&self) -> bool {
        matches!(self.mode, Mode::Threaded(_))
    }
}

/// Runs `body` with `source` prefetched on a second thread for a run of `intervals`
/// intervals (the producer fills no further unasked), and joins the thread before
/// returning. If the thread cannot be started, `body` gets the source directly.
pub fn scoped<S, R>(
    source: &mut S,
    intervals: u64,
    body: impl FnOnce(&mut Prefetch<'_, S>) -> R,
) -> R
where
    S: LoadSource + Send + ?Sized,
{
    std::thread::scope(|scope| {
        let (source_tx, source_rx) = sync_channel::<&mut S>(1);
        let (req_tx, req_rx) = sync_channel::<Request>(1);
        let (full_tx, full_rx) = sync_channel::<Batch>(BATCHES);
        let (free_tx, free_rx) = sync_channel::<Batch>(BATCHES);
        let spawned = std::thread::Builder::new()
            .name("bankstep-load".into())
            .spawn_scoped(scope, move || {
                if let Ok(inner) = source_rx.recv() {
                    produce(inner, intervals, &req_rx, &full_tx, &free_rx);
                }
            });
        let mut pf = match spawned {
            Err(_) => Prefetch {
                mode: Mode::Direct(source),
            },
            Ok(_) => match source_tx.send(source) {
                // The thread is gone before it took the source: call it directly.
                Err(back) => Prefetch {
                    mode: Mode::Direct(back.0),
                },
                Ok(()) => Prefetch {
                    mode: Mode::Threaded(Consumer {
                        requests: req_tx,
                        full: full_rx,
                        free: free_tx,
                        batch: None,
                        next: 0,
                        streaming: false,
                        last: None,
                    }),
                },
            },
        };
        let r = body(&mut pf);
        // Closing the channels lets the producer return, and the scope joins it.
        drop(pf);
        r
    })
}

/// The producer: answers requests, and after a fill goes on filling ahead while the
/// engine's next request is known (see the module documentation). Returns when the
/// engine side has gone.
fn produce<S: LoadSource + ?Sized>(
    inner: &mut S,
    n: u64,
    requests: &Receiver<Request>,
    full: &SyncSender<Batch>,
    free: &Receiver<Batch>,
) {
    let mut unmade = BATCHES;
    // A batch to fill: a new one while fewer than BATCHES exist, else one the engine
    // sent back (waiting for it); `None` once the engine side has gone.
    let mut take = || -> Option<Batch> {
        if unmade > 0 {
            unmade -= 1;
            return Some(Batch {
                bufs: Vec::with_capacity(BATCH_CHUNKS),
                chunks: Vec::with_capacity(BATCH_CHUNKS),
            });
        }
        let mut b = free.recv().ok()?;
        b.clear();
        Some(b)
    };
    while let Ok(req) = requests.recv() {
        let Some(mut b) = take() else { return };
        match req {
            Request::Sample { k, t_s } => {
                let (got, err) = match inner.sample(k, t_s, &mut b.room(1)[0]) {
                    Ok(()) => (1, None),
                    Err(e) => (0, Some(e)),
                };
                b.chunks.push(Chunk {
                    key: Key::Sample {
                        k,
                        t_bits: t_s.to_bits(),
                    },
                    got,
                    until: if got > 0 {
                        inner.unchanged_until(k)
                    } else {
                        k + 1
                    },
                    err,
                    more: false,
                });
                if full.send(b).is_err() {
                    return;
                }
            }
            Request::Fill {
                mut k,
                mut len,
                t_first_s,
                dt_s,
                stop_at_hold,
            } => {
                // The answer goes out alone; the batches after it double in size.
                let mut size = 1;
                loop {
                    let (got, err) = inner.fill(k, t_first_s, dt_s, b.room(len), stop_at_hold);
                    let got = got.min(len);
                    let end = k + got as u64;
                    let until = if got > 0 {
                        inner.unchanged_until(end - 1)
                    } else {
                        end
                    };
                    let more =
                        err.is_none() && got > 0 && end < n && !(stop_at_hold && until > end);
                    b.chunks.push(Chunk {
                        key: Key::fill(k, len, t_first_s, dt_s, stop_at_hold),
                        got,
                        until,
                        err,
                        more,
                    });
                    if !more || b.chunks.len() >= size {
                        if full.send(b).is_err() {
                            return;
                        }
                        if !more {
                            break;
                        }
                        size = (size * 2).min(BATCH_CHUNKS);
                        b = match take() {
                            Some(b) => b,
                            None => return,
                        };
                    }
                    k = end;
                    len = len.min(usize::try_from(n - k).unwrap_or(usize::MAX));
                }
            }
        }
    }
}

/// The engine's side of the threads.
struct Consumer {
    requests: SyncSender<Request>,
    full: Receiver<Batch>,
    free: SyncSender<Batch>,
    /// The batch being handed out, and the index of its next chunk.
    batch: Option<Batch>,
    next: usize,
    /// Whether the producer will ship more chunks without being asked.
    streaming: bool,
    /// The last interval of the chunk handed out last, and its promise.
    last: Option<(u64, u64)>,
}

impl Consumer {
    /// Whether a shipped chunk is waiting to be handed out, receiving the next batch
    /// when the producer is still filling. Err when the producer has gone.
    fn ready(&mut self) -> Result<bool, ()> {
        loop {
            if let Some(b) = &self.batch {
                if self.next < b.chunks.len() {
                    return Ok(true);
                }
            }
            if let Some(b) = self.batch.take() {
                // A send fails only when the producer has gone, which the receive
                // below finds out.
                let _ = self.free.send(b);
            }
            if !self.streaming {
                return Ok(false);
            }
            let b = self.full.recv().map_err(|_| ())?;
            self.streaming = b.chunks.last().is_some_and(|c| c.more);
            self.batch = Some(b);
            self.next = 0;
        }
    }

    /// Hands out the chunk answering `key` into `out` (its length is in the key).
    fn answer(&mut self, key: Key, out: &mut [LoadSample]) -> (usize, Option<ProfileError>) {
        match self.next_chunk(key) {
            Ok((b, i, got, err)) => {
                let got = got.min(out.len());
                out[..got].copy_from_slice(&b.bufs[i][..got]);
                (got, err)
            }
            Err(e) => (0, Some(e)),
        }
    }

    /// Hands out the chunk answering `key` by giving its buffer for `buf` (the producer
    /// fills `buf` for a later chunk).
    fn answer_owned(
        &mut self,
        key: Key,
        buf: &mut Vec<LoadSample>,
    ) -> (usize, Option<ProfileError>) {
        match self.next_chunk(key) {
            Ok((b, i, got, err)) => {
                std::mem::swap(buf, &mut b.bufs[i]);
                (got, err)
            }
            Err(e) => (0, Some(e)),
        }
    }

    /// The chunk answering `key`, asked for when none is waiting: its batch, its index
    /// there, how many samples it gave and its error; the error to report when the
    /// producer has gone or made another chunk ahead.
    #[allow(clippy::type_complexity)]
    fn next_chunk(
        &mut self,
        key: Key,
    ) -> Result<(&mut Batch, usize, usize, Option<ProfileError>), ProfileError> {
        let gone = || {
            Err(ProfileError::Sequence {
                k: key.k(),
                message: "the thread filling the load ahead stopped".into(),
            })
        };
        match self.ready() {
            Err(()) => return gone(),
            Ok(true) => {}
            Ok(false) => {
                let req = match key {
                    Key::Fill {
                        k,
                        len,
                        t_first_bits,
                        dt_bits,
                        stop_at_hold,
                    } => Request::Fill {
                        k,
                        len,
                        t_first_s: f64::from_bits(t_first_bits),
                        dt_s: f64::from_bits(dt_bits),
                        stop_at_hold,
                    },
                    Key::Sample { k, t_bits } => Request::Sample {
                        k,
                        t_s: f64::from_bits(t_bits),
                    },
                };
                if self.requests.send(req).is_err() {
                    return gone();
                }
                self.streaming = true;
                if !matches!(self.ready(), Ok(true)) {
                    return gone();
                }
            }
        }
        let Some(b) = self.batch.as_mut() else {
            return gone();
        };
        let c = &mut b.chunks[self.next];
        if c.key != key {
            return Err(ProfileError::Sequence {
                k: key.k(),
                message: format!(
                    "the load was asked for out of order (interval {} was made ahead)",
                    c.key.k()
                ),
            });
        }
        let i = self.next;
        self.next += 1;
        let got = c.got.min(key.len());
        self.last = (got > 0).then(|| (key.k() + got as u64 - 1, c.until));
        let err = c.err.take();
        Ok((b, i, got, err))
    }
}

impl<S: LoadSource + ?Sized> LoadSource for Prefetch<'_, S> {
    fn sample(&mut self, k: u64, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        match &mut self.mode {
            Mode::Direct(s) => s.sample(k, t_s, out),
            Mode::Threaded(c) => {
                let key = Key::Sample {
                    k,
                    t_bits: t_s.to_bits(),
                };
                match c.answer(key, std::slice::from_mut(out)) {
                    (_, Some(e)) => Err(e),
                    _ => Ok(()),
                }
            }
        }
    }

    fn unchanged_until(&self, k: u64) -> u64 {
        match &self.mode {
            Mode::Direct(s) => s.unchanged_until(k),
            Mode::Threaded(c) => match c.last {
                Some((last, until)) if last == k => until,
                _ => k + 1,
            },
        }
    }

    fn fill(
        &mut self,
        k: u64,
        t_first_s: f64,
        dt_s: f64,
        out: &mut [LoadSample],
        stop_at_hold: bool,
    ) -> (usize, Option<ProfileError>) {
        match &mut self.mode {
            Mode::Direct(s) => s.fill(k, t_first_s, dt_s, out, stop_at_hold),
            Mode::Threaded(c) => {
                c.answer(Key::fill(k, out.len(), t_first_s, dt_s, stop_at_hold), out)
            }
        }
    }

    fn fill_owned(
        &mut self,
        k: u64,
        t_first_s: f64,
        dt_s: f64,
        buf: &mut Vec<LoadSample>,
        len: usize,
        stop_at_hold: bool,
    ) -> (usize, Option<ProfileError>) {
        match &mut self.mode {
            Mode::Direct(s) => s.fill_owned(k, t_first_s, dt_s, buf, len, stop_at_hold),
            Mode::Threaded(c) => {
                c.answer_owned(Key::fill(k, len, t_first_s, dt_s, stop_at_hold), buf)
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::{IntervalRecord, Observer, Quiet};
    use crate::error::RunError;
    use crate::scenario::Scenario;
    use crate::study::{Source, Study};
    use std::hash::{DefaultHasher, Hash, Hasher};
    use std::path::{Path, PathBuf};

    /// The engine bench's site and generator, over `seconds` at a 1 s step; with or
    /// without the generator's measurement noise (without it, the generator promises
    /// holds and the chunks end there).
    fn plant(seconds: u64, noise: bool) -> Study {
        let synth = include_str!("../../benches/synthetic_section.toml");
        let synth = if noise {
            synth.to_string()
        } else {
            let quiet = synth.replace("noise_percent = 1.0", "noise_percent = 0");
            assert_ne!(quiet, synth, "the section sets noise_percent = 1.0");
            quiet
        };
        let text = format!(
            "{}\n[run]\nduration_s = {seconds}\ntime_step_s = 1\nseed = 7\n\n[load.synthetic]\n{synth}",
            include_str!("../../benches/site_12_steps.toml")
        );
        let sc = Scenario::from_str(&text, Path::new("plant.toml")).expect("scenario");
        Study::prepare(sc).expect("study")
    }

    /// A source that writes down every call that can change it: (k, length asked,
    /// flag, samples given); a `sample` call is written with length 0.
    struct Logged<S> {
        inner: S,
        log: Vec<(u64, usize, bool, usize)>,
    }

    impl<S: LoadSource> LoadSource for Logged<S> {
        fn sample(&mut self, k: u64, t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
            let r = self.inner.sample(k, t_s, out);
            self.log.push((k, 0, false, usize::from(r.is_ok())));
            r
        }

        fn unchanged_until(&self, k: u64) -> u64 {
            self.inner.unchanged_until(k)
        }

        fn fill(
            &mut self,
            k: u64,
            t_first_s: f64,
            dt_s: f64,
            out: &mut [LoadSample],
            stop_at_hold: bool,
        ) -> (usize, Option<ProfileError>) {
            let (got, err) = self.inner.fill(k, t_first_s, dt_s, out, stop_at_hold);
            self.log.push((k, out.len(), stop_at_hold, got));
            (got, err)
        }
    }

    /// Hashes everything it hears: every interval record (its Debug text, which writes
    /// each number so that it reads back to the same bits) and every block.
    struct Recorder {
        every: bool,
        hash: DefaultHasher,
        intervals: u64,
    }

    impl Recorder {
        fn new(every: bool) -> Recorder {
            Recorder {
                every,
                hash: DefaultHasher::new(),
                intervals: 0,
            }
        }
    }

    impl Observer for Recorder {
        fn wants_every_interval(&self) -> bool {
            self.every
        }
        fn interval(&mut self, r: &IntervalRecord<'_>) -> Result<(), RunError> {
            format!(
                "{} {:x} {:?} {:?} {:?} {:?}",
                r.k,
                r.t_s.to_bits(),
                r.load,
                r.phases,
                r.mask,
                r.decision
            )
            .hash(&mut self.hash);
            self.intervals += 1;
            Ok(())
        }
        fn block(&mut self, r: &IntervalRecord<'_>, n: u64) -> Result<(), RunError> {
            (r.k, n).hash(&mut self.hash);
            self.intervals += n;
            Ok(())
        }
    }

    fn synthetic(study: &Study) -> crate::profile::synthetic::SyntheticProfile {
        match study.source().expect("source") {
            Source::Synthetic(g) => *g,
            _ => panic!("not the synthetic generator"),
        }
    }

    /// What one run leaves to compare: its result as JSON (every number to the bit),
    /// the observer's hash and count, and the calls the generator received.
    type Outcome = (String, u64, u64, Vec<(u64, usize, bool, usize)>);

    fn outcome(
        r: Result<crate::engine::RunResult, RunError>,
        rec: &Recorder,
    ) -> (String, u64, u64) {
        let r = r.expect("run");
        (
            serde_json::to_string(&r).expect("json"),
            rec.hash.finish(),
            rec.intervals,
        )
    }

    fn direct(study: &Study, every: bool) -> Outcome {
        let mut src = Logged {
            inner: synthetic(study),
            log: Vec::new(),
        };
        let mut rec = Recorder::new(every);
        let (json, h, m) = outcome(study.run_on(&mut src, &mut rec), &rec);
        (json, h, m, src.log)
    }

    fn prefetched(study: &Study, every: bool) -> Outcome {
        let mut src = Logged {
            inner: synthetic(study),
            log: Vec::new(),
        };
        let mut rec = Recorder::new(every);
        let r = scoped(&mut src, study.plan.intervals, |pf| {
            assert!(pf.is_threaded(), "the producer thread started");
            study.run_on(pf, &mut rec)
        });
        let (json, h, m) = outcome(r, &rec);
        (json, h, m, src.log)
    }

    // The prefetched run against the same run on the generator directly: the same
    // result to the bit, the same intervals and blocks heard by the observer, and the
    // same calls of the generator in the same order (so the producer neither skipped
    // nor added a fill). With noise (every chunk full) and without (chunks end at
    // holds, and the engine asks again after each), with blocks and with an observer
    // that wants every interval; runs shorter than a chunk, a few chunks and a bit, and
    // long enough for every batch to go round more than once.
    #[test]
    fn prefetched_runs_equal_direct_runs() {
        for seconds in [100, 3 * 256 + 17, 6 * 3600 + 5] {
            for noise in [true, false] {
                let study = plant(seconds, noise);
                for every in [false, true] {
                    let a = direct(&study, every);
                    let b = prefetched(&study, every);
                    let ctx = format!("{seconds} s, noise {noise}, every interval {every}");
                    assert_eq!(a.2, study.plan.intervals, "{ctx}");
                    assert_eq!(a.0, b.0, "{ctx}: result");
                    assert_eq!((a.1, a.2), (b.1, b.2), "{ctx}: intervals and blocks");
                    assert_eq!(a.3, b.3, "{ctx}: the generator's calls");
                }
            }
        }
    }

    // `Study::run` (which prefetches the generator on a machine with two cores or more,
    // when the engine takes whole chunks) against `run_on` over a fresh generator.
    #[test]
    fn study_run_equals_the_run_on_the_generator() {
        for noise in [true, false] {
            let study = plant(2 * 3600, noise);
            for every in [false, true] {
                let mut rec_a = Recorder::new(every);
                let a = outcome(study.run_on(&mut synthetic(&study), &mut rec_a), &rec_a);
                let mut rec_b = Recorder::new(every);
                let b = outcome(study.run(&mut rec_b), &rec_b);
                assert_eq!(a, b, "noise {noise}, every interval {every}");
            }
        }
    }

    /// A load that changes every `period` intervals and promises to hold in between,
    /// failing at the first interval asked for from `fail_at` on; counts the samples
    /// asked for.
    struct Steps {
        period: u64,
        fail_at: u64,
        asked: u64,
    }

    impl LoadSource for Steps {
        fn sample(&mut self, k: u64, _t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
            self.asked += 1;
            if k >= self.fail_at {
                return Err(ProfileError::Row {
                    file: PathBuf::from("steps.csv"),
                    line: k + 2,
                    message: "made to fail".into(),
                });
            }
            // Swings across the bank's steps, so that it operates now and then.
            let x = ((k / self.period) % 9) as f64;
            out.p_kw = [200.0 + 10.0 * x; 3];
            out.q_kvar = [40.0 + 12.0 * x; 3];
            Ok(())
        }

        fn unchanged_until(&self, k: u64) -> u64 {
            (k / self.period + 1) * self.period
        }
    }

    /// The error, the intervals heard before it and the samples asked for.
    fn failing_run(
        study: &Study,
        src: &mut Steps,
        threaded: bool,
        every: bool,
    ) -> (String, u64, u64) {
        let mut rec = Recorder::new(every);
        let r = if threaded {
            scoped(src, study.plan.intervals, |pf| study.run_on(pf, &mut rec))
        } else {
            study.run_on(src, &mut rec)
        };
        let e = match r {
            Err(e) => e.to_string(),
            Ok(_) => "no error".into(),
        };
        (e, rec.intervals, src.asked)
    }

    // An error of the inner source comes after the same intervals, with the same
    // message, as on the source directly, and no sample past it is asked for: at the
    // first interval, inside the first chunk, at its last interval, at the next chunk's
    // first and further on; with samples that change every interval and with holds
    // (where the engine asks again inside or at the end of each).
    #[test]
    fn a_source_error_comes_after_the_intervals_before_it() {
        let study = plant(3600, true);
        for period in [1, 7, 300] {
            for fail_at in [0, 1, 255, 256, 300, 1000] {
                for every in [true, false] {
                    let new = || Steps {
                        period,
                        fail_at,
                        asked: 0,
                    };
                    let a = failing_run(&study, &mut new(), false, every);
                    let b = failing_run(&study, &mut new(), true, every);
                    let ctx = format!("period {period}, fail at {fail_at}, every {every}");
                    assert!(a.0.contains("made to fail"), "{ctx}: {}", a.0);
                    assert_eq!(a, b, "{ctx}");
                    if period == 1 || every {
                        assert!(
                            a.0.contains(&format!(":{}:", fail_at + 2)),
                            "{ctx}: {}",
                            a.0
                        );
                        assert_eq!(b.1, fail_at, "{ctx}: intervals before the error");
                        assert_eq!(b.2, fail_at + 1, "{ctx}: samples asked for");
                    }
                }
            }
        }
    }

    // A request other than the chunk made ahead is refused (the generator has moved
    // on, so no answer could be the right bits), and single samples come as from the
    // generator itself.
    #[test]
    fn requests_out_of_order_are_refused_and_samples_answered() {
        let study = plant(3600, true);
        let (t0, dt) = (study.plan.t_first_s, study.plan.dt_s);
        let mut out = vec![LoadSample::default(); 256];
        let mut g = synthetic(&study);
        let (first, skipped) = scoped(&mut g, study.plan.intervals, |pf| {
            let first = pf.fill(0, t0, dt, &mut out, false);
            let skipped = pf.fill(512, t0, dt, &mut out, false);
            (first, skipped)
        });
        assert_eq!(first.0, 256);
        assert!(first.1.is_none());
        assert!(
            matches!(skipped, (0, Some(ProfileError::Sequence { k: 512, .. }))),
            "{skipped:?}"
        );

        let mut plain = synthetic(&study);
        let mut g = synthetic(&study);
        scoped(&mut g, study.plan.intervals, |pf| {
            for k in 0..300 {
                let t = t0 + k as f64 * dt;
                let (mut a, mut b) = (LoadSample::default(), LoadSample::default());
                plain.sample(k, t, &mut a).expect("sample");
                pf.sample(k, t, &mut b).expect("prefetched sample");
                assert_eq!(a, b, "interval {k}");
                assert_eq!(pf.unchanged_until(k), plain.unchanged_until(k));
            }
        });
    }

    /// Fails at interval `at`.
    struct StopsAt(u64);

    impl Observer for StopsAt {
        fn interval(&mut self, r: &IntervalRecord<'_>) -> Result<(), RunError> {
            if r.k == self.0 {
                return Err(RunError::Config("stopped by the observer".into()));
            }
            Ok(())
        }
    }

    // An observer's error ends the run while the producer is filling ahead; the run
    // returns that error and the producer's thread is joined (the test would hang
    // otherwise).
    #[test]
    fn an_observer_error_ends_the_producer_too() {
        let study = plant(3600, true);
        for at in [0, 10, 3000] {
            let mut g = synthetic(&study);
            let r = scoped(&mut g, study.plan.intervals, |pf| {
                study.run_on(pf, &mut StopsAt(at))
            });
            assert!(
                matches!(&r, Err(RunError::Config(m)) if m.contains("observer")),
                "{r:?}"
            );
        }
        // Quiet has no error to give: the same study runs to its end.
        let mut g = synthetic(&study);
        let r = scoped(&mut g, study.plan.intervals, |pf| {
            study.run_on(pf, &mut Quiet)
        });
        assert!(r.is_ok());
    }
}
