//! Sources of samples: a serial port, a recorded capture, or the built-in simulator, each
//! on its own thread, handing events to the consumer through a bounded lock-free ring.

mod replay;
mod serial;
mod simulated;

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use dbtrail::events::Event;
use dbtrail::link::LinkCounters;
use ringbuf::traits::{Consumer, Observer, Producer, Split};
use ringbuf::{HeapCons, HeapProd, HeapRb};

pub use replay::ReplaySpec;
pub use serial::{open_port, SerialSpec};
pub use simulated::SimSpec;

/// Events the ring holds for a live port: one event per read, so even short reads at a
/// high rate have room for the 40 ms between two frames of the screen.
const LIVE_RING: usize = 4096;
/// Events the ring holds for the simulator, which waits when it is full: each event
/// carries up to 16 Ki samples (64 KiB), so a short ring keeps memory flat.
pub const WAITING_RING: usize = 4;

/// A source running on its own thread.
pub struct Running {
    /// Where the events arrive.
    pub events: HeapCons<Event>,
    /// The source's link health.
    pub counters: Arc<LinkCounters>,
    /// True once the source has nothing more to send.
    pub finished: Arc<AtomicBool>,
    /// True for a live source, whose time runs with the wall clock even when silent.
    pub live: bool,
    /// A description for headers and status lines.
    pub description: String,
    /// When the source's time started.
    pub started: Instant,
    /// True for a capture paced to the wall clock: its time runs with the clock too, but
    /// only samples move it.
    pub paced: bool,
    stop: Arc<AtomicBool>,
    thread: Option<JoinHandle<()>>,
}

impl Running {
    /// Source time now, seconds.
    pub fn now(&self) -> f64 {
        self.started.elapsed().as_secs_f64()
    }

    /// Takes the next event, if one is waiting.
    pub fn next_event(&mut self) -> Option<Event> {
        self.events.try_pop()
    }

    /// True when the source has finished and every event has been taken.
    pub fn exhausted(&self) -> bool {
        self.finished.load(Ordering::Acquire) && self.events.is_empty()
    }

    /// Asks the source's thread to stop sending; events already in the ring stay there.
    pub fn request_stop(&self) {
        self.stop.store(true, Ordering::Release);
    }

    /// Takes what is in the ring now (at most a ring's worth and the few events the
    /// thread sends before it sees the stop), after asking the source to stop.
    pub fn drain(&mut self) -> Vec<Event> {
        self.request_stop();
        let most = self.events.capacity().get() + 4;
        std::iter::from_fn(|| self.events.try_pop())
            .take(most)
            .collect()
    }
}

/// How long a stopped source's thread is waited for: a read blocked on a silent FIFO,
/// terminal or device never returns, and the process must still end.
const JOIN_PATIENCE: Duration = Duration::from_millis(100);

impl Drop for Running {
    fn drop(&mut self) {
        self.request_stop();
        let Some(thread) = self.thread.take() else {
            return;
        };
        let deadline = Instant::now() + JOIN_PATIENCE;
        while !thread.is_finished() && Instant::now() < deadline {
            std::thread::sleep(Duration::from_millis(1));
        }
        // Left blocked in its read, the thread holds nothing that needs saving; it ends
        // with the process.
        if thread.is_finished() {
            let _ = thread.join();
        }
    }
}

/// What a full ring does to the producer.
#[derive(Clone, Copy, PartialEq, Eq)]
pub enum WhenFull {
    /// Drop the event and count an overrun: a live link must never block.
    Drop,
    /// Wait for room in a ring of this many events: a file or the simulator can always be
    /// read later.
    Wait(usize),
}

/// The producer's side: pushes events, counting or waiting out a full ring.
pub struct EventSender {
    ring: HeapProd<Event>,
    when_full: WhenFull,
    counters: Arc<LinkCounters>,
    stop: Arc<AtomicBool>,
    lost: u64,
}

impl EventSender {
    /// Sends one event; false when the consumer asked the source to stop.
    pub fn send(&mut self, event: Event) -> bool {
        if self.lost > 0 {
            let lost = Event::Lost {
                t: event.t(),
                samples: self.lost,
            };
            if self.ring.try_push(lost).is_ok() {
                self.lost = 0;
            }
        }
        let mut event = event;
        loop {
            match self.ring.try_push(event) {
                Ok(()) => return !self.stopped(),
                Err(back) if self.when_full != WhenFull::Drop && !self.stopped() => {
                    event = back;
                    std::thread::sleep(Duration::from_micros(200));
                }
                Err(_) => {
                    self.counters.add_overruns(1);
                    self.lost += 1;
                    return !self.stopped();
                }
            }
        }
    }

    /// True when the consumer asked the source to stop.
    pub fn stopped(&self) -> bool {
        self.stop.load(Ordering::Acquire)
    }
}

/// Starts `body` on a thread with a fresh ring; it returns when the source is done.
pub fn spawn(
    description: String,
    live: bool,
    when_full: WhenFull,
    body: impl FnOnce(&mut EventSender, Instant) + Send + 'static,
) -> Running {
    let capacity = match when_full {
        WhenFull::Drop => LIVE_RING,
        WhenFull::Wait(events) => events,
    };
    let (ring, events) = HeapRb::<Event>::new(capacity).split();
    let counters = Arc::new(LinkCounters::default());
    let stop = Arc::new(AtomicBool::new(false));
    let finished = Arc::new(AtomicBool::new(false));
    let started = Instant::now();
    let mut sender = EventSender {
        ring,
        when_full,
        counters: Arc::clone(&counters),
        stop: Arc::clone(&stop),
        lost: 0,
    };
    let done = Arc::clone(&finished);
    let thread = std::thread::Builder::new()
        .name("dbtrail-source".into())
        .spawn(move || {
            body(&mut sender, started);
            done.store(true, Ordering::Release);
        })
        .expect("the OS can start a thread");
    Running {
        events,
        counters,
        finished,
        live,
        description,
        started,
        paced: false,
        stop,
        thread: Some(thread),
    }
}
