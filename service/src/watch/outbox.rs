//! The output of a WatchFleet stream: alerts and refusals queue in order and are never dropped;
//! outlook changes are coalesced per vehicle (latest wins, so at most one per watched vehicle).
//! The reader takes them as the transport asks (a slow client is read slowly); the writer waits
//! while too many alerts or refusals are unread, so memory stays bounded.

use std::collections::{HashMap, VecDeque};
use std::pin::Pin;
use std::sync::{Arc, Mutex, MutexGuard};
use std::task::{Context, Poll, Waker};

use startmargin_proto::v1 as pb;
use startmargin_proto::v1::watch_fleet_response::Event;
use tokio::sync::Notify;
use tokio_stream::Stream;
use tonic::Status;

#[derive(Debug, Default)]
struct Queue {
    events: VecDeque<Event>,
    alerts_queued: usize,
    refusals_queued: usize,
    /// Events the reader has taken so far.
    taken: u64,
    outlooks: HashMap<Box<str>, pb::OutlookChange>,
    outlook_order: VecDeque<Box<str>>,
    end: Option<Status>,
    finished: bool,
    reader_gone: bool,
    waker: Option<Waker>,
}

/// The shared output queue of one stream.
#[derive(Debug, Default)]
pub(crate) struct Outbox {
    queue: Mutex<Queue>,
    /// Signalled when the reader takes an event or leaves.
    taken: Notify,
}

impl Outbox {
    fn lock(&self) -> MutexGuard<'_, Queue> {
        self.queue.lock().unwrap_or_else(|e| e.into_inner())
    }

    /// Queues alerts and refusals in order, and coalesces outlook changes.
    pub(crate) fn push(&self, events: Vec<Event>) {
        if events.is_empty() {
            return;
        }
        let waker = {
            let mut q = self.lock();
            for e in events {
                match e {
                    Event::OutlookChange(c) => {
                        let key: Box<str> = c.vehicle_id.as_str().into();
                        if q.outlooks.insert(key.clone(), c).is_none() {
                            q.outlook_order.push_back(key);
                        }
                    }
                    other => {
                        match other {
                            Event::Alert(_) => q.alerts_queued += 1,
                            Event::Refused(_) => q.refusals_queued += 1,
                            Event::OutlookChange(_) => {}
                        }
                        q.events.push_back(other);
                    }
                }
            }
            q.waker.take()
        };
        if let Some(w) = waker {
            w.wake();
        }
    }

    /// Ends the stream after what is queued, with `status` (or OK).
    pub(crate) fn finish(&self, status: Option<Status>) {
        let waker = {
            let mut q = self.lock();
            q.end = status;
            q.finished = true;
            q.waker.take()
        };
        if let Some(w) = waker {
            w.wake();
        }
    }

    /// Waits until fewer than `alerts` alerts and `refusals` refusals are unread. `false` when
    /// the reader has left.
    pub(crate) async fn wait_below(&self, alerts: usize, refusals: usize) -> bool {
        loop {
            let taken = self.taken.notified();
            {
                let q = self.lock();
                if q.reader_gone {
                    return false;
                }
                if q.alerts_queued < alerts && q.refusals_queued < refusals {
                    return true;
                }
            }
            taken.await;
        }
    }

    /// Events the reader has taken so far.
    pub(crate) fn taken(&self) -> u64 {
        self.lock().taken
    }

    /// Whether the reader has left.
    pub(crate) fn reader_gone(&self) -> bool {
        self.lock().reader_gone
    }
}

/// The response stream a client reads.
#[derive(Debug)]
pub(crate) struct Reader(pub(crate) Arc<Outbox>);

impl Stream for Reader {
    type Item = Result<pb::WatchFleetResponse, Status>;

    fn poll_next(self: Pin<&mut Self>, cx: &mut Context<'_>) -> Poll<Option<Self::Item>> {
        let outbox = &self.0;
        let mut q = outbox.lock();
        let event = if let Some(e) = q.events.pop_front() {
            match e {
                Event::Alert(_) => q.alerts_queued -= 1,
                Event::Refused(_) => q.refusals_queued -= 1,
                Event::OutlookChange(_) => {}
            }
            Some(e)
        } else if let Some(key) = q.outlook_order.pop_front() {
            q.outlooks.remove(&key).map(Event::OutlookChange)
        } else {
            None
        };
        if let Some(event) = event {
            q.taken += 1;
            drop(q);
            outbox.taken.notify_waiters();
            return Poll::Ready(Some(Ok(pb::WatchFleetResponse { event: Some(event) })));
        }
        if let Some(status) = q.end.take() {
            return Poll::Ready(Some(Err(status)));
        }
        if q.finished {
            return Poll::Ready(None);
        }
        q.waker = Some(cx.waker().clone());
        Poll::Pending
    }
}

impl Drop for Reader {
    fn drop(&mut self) {
        self.0.lock().reader_gone = true;
        self.0.taken.notify_waiters();
    }
}
