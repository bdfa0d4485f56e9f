//! The compute pool and the budgets that share it fairly.
//!
//! A fixed set of threads runs the CPU-bound work off the async runtime. Jobs wait in lanes:
//! unary calls have their own lane, which a free thread always serves first; every stream has a
//! lane of its own, and the threads take stream jobs round-robin over the streams with work
//! waiting. So a unary call waits at most for the jobs already running (one vehicle each), never
//! for a fleet or a watch re-score queued before it, and one big stream cannot starve another.
//!
//! One exception saves a hand-off where it is pure cost: when the pool is idle (a thread waits
//! and nothing is queued), one unary call at a time runs on the runtime thread that received it
//! ([`ComputePool::run_unary`]), if the runtime has another thread to serve the connections
//! meanwhile and the caller allows it (the service keeps long sampling requests on the pool). A
//! hand-off wakes a sleeping compute thread and then the waiting task, two wake-ups across cores
//! that cost about 100 µs of server CPU per call on the 2-core machine of the README's figures.
//! Under load the pool is busy and unary calls queue in their lane as before; at most one
//! runtime thread is ever held by an assessment.
//!
//! [`Budget`] bounds what streams hold of the global concurrency limit: all streams together at
//! most `stream_share_pct` of it (the rest stays for unary calls), one tenant's streams at most
//! `max_in_flight_per_tenant`, and each stream its own window (fleet slots, watch in-flight).

use std::collections::{HashMap, VecDeque};
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::{Arc, Condvar, Mutex, MutexGuard};

use tokio::sync::{OwnedSemaphorePermit, Semaphore, oneshot};

use crate::error::ApiError;
use crate::tenant::Tenant;

/// Work for a compute thread; it must catch its own panics.
pub type Job = Box<dyn FnOnce() + Send + 'static>;

/// Which queue a job waits in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Lane {
    /// A unary call: served before any stream job.
    Unary,
    /// A stream's job: streams are served round-robin.
    Stream(u64),
}

/// A new stream lane id, unique in the process.
pub fn new_stream_lane() -> Lane {
    static NEXT: AtomicU64 = AtomicU64::new(1);
    Lane::Stream(NEXT.fetch_add(1, Ordering::Relaxed))
}

#[derive(Default)]
struct Queues {
    unary: VecDeque<Job>,
    streams: HashMap<u64, VecDeque<Job>>,
    /// Streams with jobs waiting, in the order they are served.
    ring: VecDeque<u64>,
    /// Threads waiting for a job: a submit wakes one only when there is one (a wake is a system
    /// call, and with every thread busy nobody needs it).
    idle: usize,
    stopped: bool,
}

impl Queues {
    fn next(&mut self) -> Option<Job> {
        if let Some(job) = self.unary.pop_front() {
            return Some(job);
        }
        let id = self.ring.pop_front()?;
        let queue = self.streams.get_mut(&id)?;
        let job = queue.pop_front();
        if queue.is_empty() {
            self.streams.remove(&id);
        } else {
            self.ring.push_back(id);
        }
        job
    }
}

struct Shared {
    queues: Mutex<Queues>,
    ready: Condvar,
}

impl Shared {
    fn lock(&self) -> MutexGuard<'_, Queues> {
        self.queues.lock().unwrap_or_else(|e| e.into_inner())
    }
}

/// A fixed set of threads that run CPU-bound work, unary first, streams round-robin.
pub struct ComputePool {
    shared: Arc<Shared>,
    /// A unary call runs on a runtime thread now (see the module doc).
    inline_busy: AtomicBool,
}

impl std::fmt::Debug for ComputePool {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("ComputePool").finish_non_exhaustive()
    }
}

impl ComputePool {
    /// Starts `threads` workers; they stop when the pool is dropped.
    pub fn new(threads: usize) -> std::io::Result<Self> {
        let shared = Arc::new(Shared {
            queues: Mutex::new(Queues::default()),
            ready: Condvar::new(),
        });
        for i in 0..threads.max(1) {
            let shared = Arc::clone(&shared);
            std::thread::Builder::new()
                .name(format!("startmargin-compute-{i}"))
                .spawn(move || {
                    loop {
                        let job = {
                            let mut q = shared.lock();
                            loop {
                                if q.stopped {
                                    return;
                                }
                                if let Some(job) = q.next() {
                                    break job;
                                }
                                q.idle += 1;
                                q = shared.ready.wait(q).unwrap_or_else(|e| e.into_inner());
                                q.idle -= 1;
                            }
                        };
                        job();
                    }
                })?;
        }
        Ok(Self {
            shared,
            inline_busy: AtomicBool::new(false),
        })
    }

    /// Queues `job` in `lane`. The job must catch its own panics.
    pub fn submit(&self, lane: Lane, job: Job) -> Result<(), ApiError> {
        let wake = {
            let mut q = self.shared.lock();
            if q.stopped {
                return Err(ApiError::Unavailable("compute pool stopped".to_string()));
            }
            match lane {
                Lane::Unary => q.unary.push_back(job),
                Lane::Stream(id) => {
                    let queue = q.streams.entry(id).or_default();
                    let was_idle = queue.is_empty();
                    queue.push_back(job);
                    if was_idle {
                        q.ring.push_back(id);
                    }
                }
            }
            q.idle > 0
        };
        if wake {
            self.shared.ready.notify_one();
        }
        Ok(())
    }

    /// Runs `f` on a compute thread in `lane`. A panic in `f` becomes an internal error.
    pub async fn run<T, F>(&self, lane: Lane, f: F) -> Result<T, ApiError>
    where
        T: Send + 'static,
        F: FnOnce() -> Result<T, ApiError> + Send + 'static,
    {
        let (tx, rx) = oneshot::channel();
        self.submit(
            lane,
            Box::new(move || {
                let result = catch_unwind(AssertUnwindSafe(f)).unwrap_or_else(|_| {
                    Err(ApiError::Internal("the assessment panicked".to_string()))
                });
                // The caller may have given up (deadline, drain): then nobody needs the result.
                let _ = tx.send(result);
            }),
        )?;
        rx.await
            .map_err(|_| ApiError::Internal("compute thread ended without a result".to_string()))?
    }
}

impl ComputePool {
    /// Runs a unary call's `f`: on the calling runtime thread when `may_run_inline`, the pool is
    /// idle, the runtime has a second thread and no other unary call runs inline; else in the
    /// unary lane ([`ComputePool::run`]). A panic in `f` becomes an internal error either way.
    pub async fn run_unary<T, F>(&self, may_run_inline: bool, f: F) -> Result<T, ApiError>
    where
        T: Send + 'static,
        F: FnOnce() -> Result<T, ApiError> + Send + 'static,
    {
        let place = if may_run_inline && runtime_has_spare_thread() {
            self.try_inline()
        } else {
            None
        };
        match place {
            Some(_held) => catch_unwind(AssertUnwindSafe(f))
                .unwrap_or_else(|_| Err(ApiError::Internal("the assessment panicked".to_string()))),
            None => self.run(Lane::Unary, f).await,
        }
    }

    /// The inline place, when the pool is idle (a thread waits, no job is queued) and the place
    /// is free.
    fn try_inline(&self) -> Option<InlinePlace<'_>> {
        {
            let q = self.shared.lock();
            if q.stopped || q.idle == 0 || !q.unary.is_empty() || !q.ring.is_empty() {
                return None;
            }
        }
        self.inline_busy
            .compare_exchange(false, true, Ordering::Acquire, Ordering::Relaxed)
            .ok()
            .map(|_| InlinePlace(&self.inline_busy))
    }

    /// Whether a unary call runs on a runtime thread now (for the tests).
    #[cfg(test)]
    fn inline_busy(&self) -> bool {
        self.inline_busy.load(Ordering::Acquire)
    }
}

/// Whether the current tokio runtime has more than one worker thread: one held by an inline
/// assessment leaves another for the connections.
fn runtime_has_spare_thread() -> bool {
    tokio::runtime::Handle::try_current().is_ok_and(|h| h.metrics().num_workers() >= 2)
}

/// The one inline place, given back when dropped (also when the job panics).
struct InlinePlace<'a>(&'a AtomicBool);

impl Drop for InlinePlace<'_> {
    fn drop(&mut self) {
        self.0.store(false, Ordering::Release);
    }
}

impl Drop for ComputePool {
    fn drop(&mut self) {
        self.shared.lock().stopped = true;
        self.shared.ready.notify_all();
    }
}

/// The permits one stream assessment holds while it waits and runs.
#[derive(Debug)]
pub struct StreamPermit {
    _tenant: OwnedSemaphorePermit,
    _streams: OwnedSemaphorePermit,
    _global: OwnedSemaphorePermit,
}

/// The concurrency budgets streams draw from (see the module doc).
#[derive(Debug)]
pub struct Budget {
    global: Arc<Semaphore>,
    streams: Arc<Semaphore>,
    per_tenant: usize,
    tenants: Mutex<HashMap<Tenant, Arc<Semaphore>>>,
}

impl Budget {
    /// `global` is the server's concurrency limit (unary calls take it too).
    pub fn new(global: Arc<Semaphore>, stream_permits: usize, per_tenant: usize) -> Self {
        Self {
            global,
            streams: Arc::new(Semaphore::new(stream_permits.max(1))),
            per_tenant: per_tenant.max(1),
            tenants: Mutex::new(HashMap::new()),
        }
    }

    /// Waits for a place for one assessment of `tenant`'s stream: the tenant's share first,
    /// then the streams' share, then the global limit (so a tenant at its cap holds nothing of
    /// the others').
    pub async fn acquire(&self, tenant: &Tenant) -> Result<StreamPermit, ApiError> {
        let tenant_sem = {
            let mut t = self.tenants.lock().unwrap_or_else(|e| e.into_inner());
            Arc::clone(
                t.entry(tenant.clone())
                    .or_insert_with(|| Arc::new(Semaphore::new(self.per_tenant))),
            )
        };
        let closed = |_| ApiError::Unavailable("concurrency budget closed".to_string());
        let tenant = tenant_sem.acquire_owned().await.map_err(closed)?;
        let streams = Arc::clone(&self.streams)
            .acquire_owned()
            .await
            .map_err(closed)?;
        let global = Arc::clone(&self.global)
            .acquire_owned()
            .await
            .map_err(closed)?;
        Ok(StreamPermit {
            _tenant: tenant,
            _streams: streams,
            _global: global,
        })
    }
}

/// Open streams per tenant, with a quota.
#[derive(Debug, Default)]
pub struct StreamQuota {
    open: Mutex<HashMap<Tenant, usize>>,
}

/// A held stream place; the place is given back when dropped.
#[derive(Debug)]
pub struct QuotaGuard {
    quota: Arc<StreamQuota>,
    tenant: Tenant,
}

impl StreamQuota {
    /// Takes a place for `tenant`, or refuses when it already holds `max` streams.
    pub fn enter(self: &Arc<Self>, tenant: &Tenant, max: usize) -> Result<QuotaGuard, ApiError> {
        let mut open = self.open.lock().unwrap_or_else(|e| e.into_inner());
        let n = open.entry(tenant.clone()).or_default();
        if *n >= max {
            return Err(ApiError::ResourceExhausted(format!(
                "tenant {} already holds {max} open streams (streams.max_streams_per_tenant); \
                 close one or retry later",
                tenant.as_str()
            )));
        }
        *n += 1;
        Ok(QuotaGuard {
            quota: Arc::clone(self),
            tenant: tenant.clone(),
        })
    }
}

impl Drop for QuotaGuard {
    fn drop(&mut self) {
        let mut open = self.quota.open.lock().unwrap_or_else(|e| e.into_inner());
        if let Some(n) = open.get_mut(&self.tenant) {
            *n = n.saturating_sub(1);
            if *n == 0 {
                open.remove(&self.tenant);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::sync::mpsc;

    #[test]
    fn unary_jobs_go_before_queued_stream_jobs_and_streams_take_turns() {
        let pool = ComputePool::new(1).unwrap();
        let (order_tx, order_rx) = mpsc::channel::<String>();
        let (gate_tx, gate_rx) = mpsc::channel::<()>();
        // Hold the only thread until everything is queued.
        pool.submit(
            Lane::Unary,
            Box::new(move || {
                let _ = gate_rx.recv();
            }),
        )
        .unwrap();
        let push = |lane: Lane, name: &str| {
            let tx = order_tx.clone();
            let name = name.to_string();
            pool.submit(lane, Box::new(move || tx.send(name).unwrap()))
                .unwrap();
        };
        push(Lane::Stream(1), "a1");
        push(Lane::Stream(1), "a2");
        push(Lane::Stream(1), "a3");
        push(Lane::Stream(2), "b1");
        push(Lane::Unary, "u");
        gate_tx.send(()).unwrap();
        let order: Vec<String> = (0..5).map(|_| order_rx.recv().unwrap()).collect();
        assert_eq!(order, ["u", "a1", "b1", "a2", "a3"]);
    }

    /// Waits until `n` threads of `pool` wait for work (they start asynchronously).
    fn wait_idle(pool: &ComputePool, n: usize) {
        let until = std::time::Instant::now() + std::time::Duration::from_secs(10);
        while pool.shared.lock().idle < n {
            assert!(
                std::time::Instant::now() < until,
                "pool threads never got idle"
            );
            std::thread::sleep(std::time::Duration::from_millis(1));
        }
    }

    fn on_compute_thread() -> bool {
        std::thread::current()
            .name()
            .is_some_and(|n| n.starts_with("startmargin-compute"))
    }

    #[test]
    fn unary_call_on_an_idle_pool_runs_inline_once_at_a_time() {
        let rt = tokio::runtime::Builder::new_multi_thread()
            .worker_threads(2)
            .build()
            .unwrap();
        let pool = Arc::new(ComputePool::new(2).unwrap());
        wait_idle(&pool, 2);
        let caller = std::thread::current().id();
        let inner = Arc::clone(&pool);
        let (ran_on, busy, second_inline) = rt
            .block_on(pool.run_unary(true, move || {
                // While this call holds the inline place, another unary call is queued.
                Ok((
                    std::thread::current().id(),
                    inner.inline_busy(),
                    inner.try_inline().is_some(),
                ))
            }))
            .unwrap();
        assert_eq!(ran_on, caller, "ran on the calling thread");
        assert!(busy && !second_inline, "one inline call at a time");
        assert!(!pool.inline_busy(), "the place is given back");
        // A panic is an internal error and gives the place back too.
        let panicked =
            rt.block_on(pool.run_unary(true, || -> Result<(), ApiError> { panic!("boom") }));
        assert!(matches!(panicked, Err(ApiError::Internal(_))));
        assert!(!pool.inline_busy());
        // Not when the caller forbids it, nor on a runtime with a single thread.
        let on_pool = rt.block_on(pool.run_unary(false, || Ok(on_compute_thread())));
        assert!(on_pool.unwrap());
        let single = tokio::runtime::Builder::new_current_thread()
            .build()
            .unwrap();
        wait_idle(&pool, 2);
        let on_pool = single.block_on(pool.run_unary(true, || Ok(on_compute_thread())));
        assert!(on_pool.unwrap());
    }

    #[test]
    fn unary_call_on_a_busy_pool_waits_in_its_lane() {
        let rt = tokio::runtime::Builder::new_multi_thread()
            .worker_threads(2)
            .build()
            .unwrap();
        let pool = ComputePool::new(1).unwrap();
        wait_idle(&pool, 1);
        // Hold the only thread: the pool is busy, so the call goes to it once it is free.
        let (gate_tx, gate_rx) = mpsc::channel::<()>();
        pool.submit(
            Lane::Stream(7),
            Box::new(move || {
                let _ = gate_rx.recv();
            }),
        )
        .unwrap();
        let opened = std::thread::spawn(move || {
            std::thread::sleep(std::time::Duration::from_millis(20));
            gate_tx.send(()).unwrap();
        });
        let on_pool = rt
            .block_on(pool.run_unary(true, || Ok(on_compute_thread())))
            .unwrap();
        opened.join().unwrap();
        assert!(
            on_pool,
            "a busy pool runs the unary call on a compute thread"
        );
        assert!(!pool.inline_busy());
    }

    #[test]
    fn quota_counts_per_tenant_and_gives_places_back() {
        let q = Arc::new(StreamQuota::default());
        let a = Tenant(Arc::from("a"));
        let b = Tenant(Arc::from("b"));
        let g1 = q.enter(&a, 2).unwrap();
        let _g2 = q.enter(&a, 2).unwrap();
        assert!(q.enter(&a, 2).is_err());
        let _g3 = q.enter(&b, 2).unwrap();
        drop(g1);
        assert!(q.enter(&a, 2).is_ok());
    }
}
