//! The crew: worker threads that stay awake between the short parallel stages of a step.
//!
//! A DSMC step of a few tens of thousands of molecules lasts about a millisecond and has half a
//! dozen parallel stages (move, sort, gathers, collisions, sampling). A general work-stealing
//! pool puts idle workers to sleep within microseconds, and on a virtual machine waking one
//! costs 30–40 µs (measured on the project's 2-core CI machine: a 235 µs loop took 150–175 µs
//! on two rayon threads, 123 µs with workers kept awake), so most of the second core was lost
//! to wake-ups. The crew keeps `threads − 1` workers spinning (then yielding) for
//! [`STAY_AWAKE`] after each job, and only then parks them, so back-to-back stages start at once;
//! the calling thread always takes part, so a crew of one thread is plain serial code.
//!
//! A job is `n` work units, each thread starting on its own contiguous share of them and then
//! helping with the rest (see `Job`); the caller returns when every unit is done. Which thread runs a unit never matters to the results:
//! units carry their own random streams. Invariants: every unit runs exactly once per job; a
//! worker only touches a job after registering on it, and the caller does not return (so the
//! job's borrowed data stays alive) until the job is closed and no worker is registered; a
//! panic in any unit is carried to the caller after the job has drained. Jobs must not nest.

use std::any::Any;
use std::cell::UnsafeCell;
use std::panic::{catch_unwind, resume_unwind, AssertUnwindSafe};
use std::sync::atomic::{AtomicBool, AtomicU64, AtomicUsize, Ordering};
use std::sync::{Arc, Condvar, Mutex};
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

/// How long an idle worker stays awake (spinning, then yielding) before it parks. Longer than
/// the serial gaps inside a step; short enough that a finished run does not burn a core.
pub const STAY_AWAKE: Duration = Duration::from_millis(2);

/// Idle time spent spinning before an idle worker starts yielding its core to other threads.
const SPIN: Duration = Duration::from_micros(50);

/// Bits of the job state word: generation (high 32), closed flag, registered workers.
const CLOSED: u64 = 1 << 31;
const COUNT: u64 = CLOSED - 1;

/// One job: units `0..n`, split into one contiguous range per thread. Thread t first works
/// through its own range, then helps with the others' (each range's counter hands out each of
/// its units once). Thread t thus handles about the same part of the arrays in every stage and
/// every step, and that part stays in its core's cache: on two cores, handing out units
/// alternately made each stage pull the other core's data across (the sort's column gathers
/// did not scale at all).
struct Job<'a> {
    next: Vec<Padded>,
    ends: Vec<usize>,
    f: &'a (dyn Fn(usize) + Sync),
}

impl Job<'_> {
    fn new<'a>(
        n: usize,
        threads: usize,
        first: &dyn Fn(usize) -> usize,
        f: &'a (dyn Fn(usize) + Sync),
    ) -> Job<'a> {
        // Monotone and within 0..=n whatever `first` returns.
        let mut last = 0;
        let mut starts: Vec<usize> = (0..threads)
            .map(|t| {
                last = if t == 0 { 0 } else { first(t).clamp(last, n) };
                last
            })
            .collect();
        starts.push(n);
        let bound = |t: usize| starts[t];
        Job {
            next: (0..threads)
                .map(|t| Padded(AtomicUsize::new(bound(t))))
                .collect(),
            ends: (1..=threads).map(bound).collect(),
            f,
        }
    }

    fn work(&self, thread: usize) {
        let k = self.next.len();
        for u in (0..k).map(|j| (thread + j) % k) {
            loop {
                let i = self.next[u].0.fetch_add(1, Ordering::Relaxed);
                if i >= self.ends[u] {
                    break;
                }
                (self.f)(i);
            }
        }
    }
}

/// A range counter on a cache line of its own (two, against the adjacent-line prefetcher):
/// with the counters side by side, every unit taken by one thread pulled the line away from the
/// other (on two cores a job of 64 empty units cost 2 µs, 0.5 µs padded).
#[repr(align(128))]
struct Padded(AtomicUsize);

/// One job's items or results, one slot per unit. A slot is touched only by the single run of
/// its unit (the job hands out each unit once), and the caller reads the results only after
/// the job has drained, so no lock is needed. (A mutex per slot made every unit bounce lock
/// lines between the cores: a job of 64 units cost 8 µs on two threads.)
struct Slots<T>(Vec<UnsafeCell<Option<T>>>);

// SAFETY: see the type's comment: each slot is accessed by one thread at a time, the caller's
// accesses are ordered after the workers' by the job's close (Acquire/Release on the state).
unsafe impl<T: Send> Sync for Slots<T> {}

impl<T> Slots<T> {
    fn new(items: impl Iterator<Item = Option<T>>) -> Self {
        Slots(items.map(UnsafeCell::new).collect())
    }

    /// SAFETY: the caller must be the only one to touch slot `i` while this runs.
    unsafe fn take(&self, i: usize) -> Option<T> {
        unsafe { (*self.0[i].get()).take() }
    }

    /// SAFETY: as for `take`.
    unsafe fn put(&self, i: usize, v: T) {
        unsafe { *self.0[i].get() = Some(v) }
    }
}

struct Inner {
    /// Generation << 32 | CLOSED | registered workers.
    state: AtomicU64,
    /// The current job, valid while its generation is open or has registered workers.
    job: UnsafeCell<*const Job<'static>>,
    stop: AtomicBool,
    sleepers: AtomicUsize,
    lock: Mutex<()>,
    wake: Condvar,
    panic: Mutex<Option<Box<dyn Any + Send>>>,
    in_job: AtomicBool,
}

// SAFETY: `job` is written only by the caller of `Crew::run` while no worker is registered
// and the state is closed (see the module invariants), and read by workers only after they
// have registered on the generation that published it; everything else is atomic or locked.
unsafe impl Sync for Inner {}
unsafe impl Send for Inner {}

/// A team of `threads − 1` workers plus the calling thread.
pub struct Crew {
    inner: Arc<Inner>,
    workers: Vec<JoinHandle<()>>,
}

impl Crew {
    /// A crew of `threads` threads in all (the caller and `threads − 1` workers; at least 1).
    pub fn new(threads: usize) -> Crew {
        let inner = Arc::new(Inner {
            state: AtomicU64::new(CLOSED),
            job: UnsafeCell::new(std::ptr::null()),
            stop: AtomicBool::new(false),
            sleepers: AtomicUsize::new(0),
            lock: Mutex::new(()),
            wake: Condvar::new(),
            panic: Mutex::new(None),
            in_job: AtomicBool::new(false),
        });
        let workers = (1..threads.max(1))
            .map(|k| {
                let inner = Arc::clone(&inner);
                std::thread::Builder::new()
                    .name(format!("kinflux-crew-{k}"))
                    .spawn(move || worker(&inner, k))
                    .expect("cannot start a worker thread")
            })
            .collect();
        Crew { inner, workers }
    }

    /// Threads in the crew, the caller included.
    pub fn threads(&self) -> usize {
        self.workers.len() + 1
    }

    /// Run `f(i)` for every i in 0..n, spread over the crew; returns when all are done.
    pub fn run(&self, n: usize, f: &(dyn Fn(usize) + Sync)) {
        let threads = self.threads();
        self.run_split(n, &|t| n * t / threads, f);
    }

    /// [`Crew::run`] with thread t starting on units `first(t)..first(t + 1)` (t ≥ 1; thread 0
    /// starts at 0): for units of uneven cost, so that each thread's share is about the same
    /// part of the molecule arrays as in the other stages.
    pub fn run_split(&self, n: usize, first: &dyn Fn(usize) -> usize, f: &(dyn Fn(usize) + Sync)) {
        if self.workers.is_empty() || n <= 1 {
            (0..n).for_each(f);
            return;
        }
        let inner = &*self.inner;
        assert!(
            !inner.in_job.swap(true, Ordering::Acquire),
            "crew jobs must not nest"
        );
        let job = Job::new(n, self.threads(), first, f);
        let generation = (inner.state.load(Ordering::Relaxed) >> 32).wrapping_add(1) & 0xFFFF_FFFF;
        // SAFETY: the previous job is closed with no registered worker (we waited for that
        // before returning from the last `run`), so nobody reads the slot now. The pointer is
        // cleared again below before `job` goes out of scope.
        unsafe {
            *inner.job.get() =
                std::mem::transmute::<*const Job<'_>, *const Job<'static>>(&job as *const Job<'_>);
        }
        inner.state.store(generation << 32, Ordering::SeqCst);
        if inner.sleepers.load(Ordering::SeqCst) > 0 {
            let _g = inner.lock.lock().unwrap_or_else(|e| e.into_inner());
            inner.wake.notify_all();
        }
        let mine = catch_unwind(AssertUnwindSafe(|| job.work(0)));
        // Close the job; workers that have not registered yet will not.
        inner.state.fetch_or(CLOSED, Ordering::AcqRel);
        let started = Instant::now();
        while inner.state.load(Ordering::Acquire) & COUNT != 0 {
            if started.elapsed() < SPIN {
                std::hint::spin_loop();
            } else {
                std::thread::yield_now();
            }
        }
        // SAFETY: closed and no registered worker: nobody can read the slot.
        unsafe { *inner.job.get() = std::ptr::null() };
        inner.in_job.store(false, Ordering::Release);
        if let Err(p) = mine {
            resume_unwind(p);
        }
        let theirs = inner.panic.lock().unwrap_or_else(|e| e.into_inner()).take();
        if let Some(p) = theirs {
            resume_unwind(p);
        }
    }

    /// Apply `f(i, item)` to every item, spread over the crew; results in item order.
    pub fn map<T: Send, R: Send>(&self, items: Vec<T>, f: impl Fn(usize, T) -> R + Sync) -> Vec<R> {
        let (n, threads) = (items.len(), self.threads());
        self.map_split(items, |t| n * t / threads, f)
    }

    /// [`Crew::map`] with thread t starting on items `first(t)..` (see [`Crew::run_split`]).
    pub fn map_split<T: Send, R: Send>(
        &self,
        items: Vec<T>,
        first: impl Fn(usize) -> usize,
        f: impl Fn(usize, T) -> R + Sync,
    ) -> Vec<R> {
        let n = items.len();
        if self.workers.is_empty() || n <= 1 {
            return items
                .into_iter()
                .enumerate()
                .map(|(i, t)| f(i, t))
                .collect();
        }
        let slots = Slots::new(items.into_iter().map(Some));
        let out = Slots::new((0..n).map(|_| None));
        self.run_split(n, &first, &|i| {
            // SAFETY: unit i runs once, and only it touches slot i of either (see `Slots`).
            let item = unsafe { slots.take(i) }.expect("each unit runs once");
            let r = f(i, item);
            unsafe { out.put(i, r) };
        });
        // A panicking unit has been re-raised by `run_split`, so every slot is filled here.
        out.0
            .into_iter()
            .map(|c| c.into_inner().expect("each unit ran"))
            .collect()
    }

    /// Apply `f(i, item)` to every item, spread over the crew.
    pub fn for_each<T: Send>(&self, items: Vec<T>, f: impl Fn(usize, T) + Sync) {
        self.map(items, f);
    }
}

impl Drop for Crew {
    fn drop(&mut self) {
        self.inner.stop.store(true, Ordering::SeqCst);
        {
            let _g = self.inner.lock.lock().unwrap_or_else(|e| e.into_inner());
            self.inner.wake.notify_all();
        }
        for w in self.workers.drain(..) {
            let _ = w.join();
        }
    }
}

impl std::fmt::Debug for Crew {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "Crew({} threads)", self.threads())
    }
}

/// A worker: wait for a new generation (spin, yield, then park), register on it if it is
/// still open, run units until none are left, deregister.
fn worker(inner: &Inner, thread: usize) {
    let mut seen = inner.state.load(Ordering::Acquire) >> 32;
    loop {
        let idle = Instant::now();
        let mut spins = 0u32;
        let s = loop {
            if inner.stop.load(Ordering::Acquire) {
                return;
            }
            let s = inner.state.load(Ordering::Acquire);
            if s >> 32 != seen {
                break s;
            }
            spins = spins.wrapping_add(1);
            if !spins.is_multiple_of(64) {
                std::hint::spin_loop();
                continue;
            }
            let waited = idle.elapsed();
            if waited < SPIN {
                continue;
            }
            if waited < STAY_AWAKE {
                std::thread::yield_now();
                continue;
            }
            let mut g = inner.lock.lock().unwrap_or_else(|e| e.into_inner());
            inner.sleepers.fetch_add(1, Ordering::SeqCst);
            while inner.state.load(Ordering::SeqCst) >> 32 == seen
                && !inner.stop.load(Ordering::SeqCst)
            {
                g = inner.wake.wait(g).unwrap_or_else(|e| e.into_inner());
            }
            inner.sleepers.fetch_sub(1, Ordering::SeqCst);
        };
        seen = s >> 32;
        // Register while the generation is still the one seen and open.
        let mut cur = s;
        let registered = loop {
            if cur >> 32 != seen || cur & CLOSED != 0 {
                break false;
            }
            match inner.state.compare_exchange_weak(
                cur,
                cur + 1,
                Ordering::AcqRel,
                Ordering::Acquire,
            ) {
                Ok(_) => break true,
                Err(now) => cur = now,
            }
        };
        if !registered {
            continue;
        }
        // SAFETY: registered on an open generation, so the caller published this job's
        // pointer before opening it and keeps the job alive until we deregister.
        let job = unsafe { &**inner.job.get() };
        if let Err(p) = catch_unwind(AssertUnwindSafe(|| job.work(thread))) {
            *inner.panic.lock().unwrap_or_else(|e| e.into_inner()) = Some(p);
        }
        inner.state.fetch_sub(1, Ordering::Release);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::sync::atomic::AtomicU32;

    #[test]
    fn every_unit_runs_exactly_once_over_many_jobs() {
        for threads in [1, 2, 3] {
            let crew = Crew::new(threads);
            for n in [0usize, 1, 2, 7, 100, 1000] {
                let hits: Vec<AtomicU32> = (0..n).map(|_| AtomicU32::new(0)).collect();
                for _ in 0..50 {
                    crew.run(n, &|i| {
                        hits[i].fetch_add(1, Ordering::Relaxed);
                    });
                }
                assert!(hits.iter().all(|h| h.load(Ordering::Relaxed) == 50));
            }
        }
    }

    #[test]
    fn map_keeps_item_order_and_moves_mutable_slices() {
        let crew = Crew::new(2);
        let mut v: Vec<u64> = (0..10_000).collect();
        let chunks: Vec<&mut [u64]> = v.chunks_mut(97).collect();
        let sums = crew.map(chunks, |i, c| {
            for x in c.iter_mut() {
                *x *= 2;
            }
            (i, c.iter().sum::<u64>())
        });
        for (k, (i, _)) in sums.iter().enumerate() {
            assert_eq!(k, *i);
        }
        assert_eq!(
            sums.iter().map(|s| s.1).sum::<u64>(),
            2 * (0..10_000u64).sum::<u64>()
        );
        assert!(v.iter().enumerate().all(|(i, &x)| x == 2 * i as u64));
    }

    #[test]
    fn parked_workers_wake_for_the_next_job() {
        let crew = Crew::new(2);
        let count = AtomicU32::new(0);
        crew.run(10, &|_| {
            count.fetch_add(1, Ordering::Relaxed);
        });
        std::thread::sleep(STAY_AWAKE * 3);
        crew.run(10, &|_| {
            count.fetch_add(1, Ordering::Relaxed);
        });
        assert_eq!(count.load(Ordering::Relaxed), 20);
    }

    #[test]
    fn a_panicking_unit_reaches_the_caller_and_the_crew_still_works() {
        let crew = Crew::new(2);
        let r = catch_unwind(AssertUnwindSafe(|| {
            crew.run(64, &|i| {
                if i == 40 {
                    panic!("unit 40");
                }
            })
        }));
        assert!(r.is_err());
        let count = AtomicU32::new(0);
        crew.run(64, &|_| {
            count.fetch_add(1, Ordering::Relaxed);
        });
        assert_eq!(count.load(Ordering::Relaxed), 64);
    }
}
