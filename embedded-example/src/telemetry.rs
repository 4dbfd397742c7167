//! Per-interrupt telemetry from the interrupt to the main loop: one
//! [`Record`] an interrupt through a `heapless::spsc::Queue` (bounded,
//! lock-free: the interrupt enqueues with atomic loads and stores only,
//! native on ARMv6-M too), which the main loop dequeues to judge the cycle
//! and logs with defmt. Its two ends are made at compile time and handed
//! to their contexts once, under a critical section.
//!
//! Each record carries the tag of the inputs the interrupt read: the main
//! loop posts a cycle's inputs and their new tag together, with the
//! interrupt masked ([`Receiver::post`]), and takes the first record with
//! that tag ([`Receiver::wait`]). The interrupt reports once per inputs:
//! where the main loop's judging outlasts a period (the plant's model in
//! software floating point on the Cortex-M0), the interrupts that run
//! again on the same inputs queue nothing.

use core::cell::RefCell;
use core::sync::atomic::{AtomicU32, Ordering};

use critical_section::Mutex;
use heapless::spsc::{Consumer, Producer, Queue};
use timing_core::trim::TrimStatus;

/// Records the queue holds (one slot of the eight stays free). The main
/// loop takes each record before it posts the next inputs: more than one
/// waiting means it fell behind.
const SLOTS: usize = 8;

/// The tag of the inputs posted last (the main loop writes it, the
/// interrupt reads it).
static POSTED: AtomicU32 = AtomicU32::new(0);

/// What one interrupt did: the record's number, the tag of the inputs it
/// read, the records it could not queue before this one, and its path's
/// figures.
#[derive(Debug, Clone, Copy, defmt::Format)]
pub struct Record {
    /// The record's number, from 0 at start-up.
    pub seq: u32,
    /// The tag of the inputs it read ([`Receiver::post`]).
    pub inputs: u32,
    /// Records dropped since start-up because the queue was full.
    pub dropped: u32,
    /// The path it ran.
    pub path: Path,
}

/// The scenario path an interrupt ran, with its SysTick counts (the empty
/// measurement not yet taken off).
#[derive(Debug, Clone, Copy, defmt::Format)]
pub enum Path {
    /// The resonant cell's methods: each method's compute path.
    Cell {
        /// SysTick ticks per method, in `METHODS` order.
        ticks: [u32; 5],
    },
    /// The half-bridge leg: each edge's compute path.
    Leg {
        /// SysTick ticks per edge (falling, rising).
        ticks: [u32; 2],
    },
    /// The trimmed table.
    Trim {
        /// SysTick ticks of the trim's update (`None` where the last
        /// command expected no opening, so no update ran).
        update_ticks: Option<u32>,
        /// SysTick ticks of the trimmed command.
        command_ticks: u32,
        /// The trim's status after the update.
        status: TrimStatus,
        /// The command's region.
        region: u16,
        /// The region's correction, ticks.
        correction_ticks: f32,
    },
}

type Ends = (
    Mutex<RefCell<Option<Producer<'static, Record>>>>,
    Mutex<RefCell<Option<Consumer<'static, Record>>>>,
);

/// The queue's two ends, split at compile time, each taken once.
static ENDS: Ends = {
    static mut QUEUE: Queue<Record, SLOTS> = Queue::new();
    // SAFETY: `QUEUE` is reachable only here, and only through the two
    // ends made once by this initialiser.
    #[allow(static_mut_refs)]
    let (p, c) = unsafe { QUEUE.split_const() };
    (
        Mutex::new(RefCell::new(Some(p))),
        Mutex::new(RefCell::new(Some(c))),
    )
};

/// The producer end, for the interrupt (`None` after the first call).
pub fn producer() -> Option<Producer<'static, Record>> {
    critical_section::with(|cs| ENDS.0.borrow_ref_mut(cs).take())
}

/// The consumer end, for the main loop (`None` after the first call).
pub fn consumer() -> Option<Consumer<'static, Record>> {
    critical_section::with(|cs| ENDS.1.borrow_ref_mut(cs).take())
}

/// The interrupt's side: reports once per inputs, numbers each record and
/// counts what the full queue refused.
pub struct Sender {
    end: Option<Producer<'static, Record>>,
    seq: u32,
    dropped: u32,
    /// The tag of the inputs reported last.
    reported: Option<u32>,
}

impl Sender {
    /// Without its end yet (it takes it on the first send).
    pub const fn new() -> Self {
        Self {
            end: None,
            seq: 0,
            dropped: 0,
            reported: None,
        }
    }

    /// Queue this interrupt's record (outside the timed paths), unless an
    /// earlier interrupt reported on the same inputs.
    pub fn send(&mut self, path: Path) {
        // (The main loop cannot run during the interrupt: the tag is the
        // one of the inputs it read.)
        let inputs = POSTED.load(Ordering::Acquire);
        if self.reported == Some(inputs) {
            return;
        }
        self.reported = Some(inputs);
        if self.end.is_none() {
            self.end = producer();
        }
        let record = Record {
            seq: self.seq,
            inputs,
            dropped: self.dropped,
            path,
        };
        self.seq = self.seq.wrapping_add(1);
        match self.end.as_mut().map(|p| p.enqueue(record)) {
            Some(Ok(())) => {}
            _ => self.dropped = self.dropped.wrapping_add(1),
        }
    }
}

/// The main loop's side: waits for records and keeps count of what was
/// stale or missing.
pub struct Receiver {
    end: Consumer<'static, Record>,
    /// Records received.
    pub received: u32,
    /// Records dropped by [`Receiver::wait`]: of interrupts that ran on
    /// the last cycle's inputs (while the main loop was still judging it).
    pub stale: u32,
    /// The most records waiting at once.
    pub deepest: usize,
    /// The record number expected next (gaps are lost records).
    next: Option<u32>,
    /// The tag of the inputs posted last.
    tag: u32,
    /// Records the interrupt numbered but the main loop never saw.
    pub lost: u32,
    /// The interrupt's own count of records dropped on a full queue.
    pub dropped: u32,
    /// Records of another path than the scenario's (counted by the
    /// scenarios).
    pub wrong_path: u32,
}

impl Receiver {
    /// The main loop's receiver (`None` if the end was taken before).
    pub fn new() -> Option<Self> {
        Some(Self {
            end: consumer()?,
            received: 0,
            stale: 0,
            deepest: 0,
            next: None,
            tag: POSTED.load(Ordering::Relaxed),
            lost: 0,
            dropped: 0,
            wrong_path: 0,
        })
    }

    fn take(&mut self) -> Option<Record> {
        self.deepest = self.deepest.max(self.end.len());
        let r = self.end.dequeue()?;
        if let Some(n) = self.next {
            self.lost = self.lost.wrapping_add(r.seq.wrapping_sub(n));
        }
        self.next = Some(r.seq.wrapping_add(1));
        self.dropped = r.dropped;
        self.received = self.received.wrapping_add(1);
        Some(r)
    }

    /// Post a cycle's inputs (`post` writes them to the registers) and
    /// their new tag together, with the interrupt masked, so that an
    /// interrupt reads either the last inputs with the last tag or these
    /// with this one.
    pub fn post(&mut self, post: impl FnOnce()) {
        self.tag = self.tag.wrapping_add(1);
        critical_section::with(|_| {
            post();
            POSTED.store(self.tag, Ordering::Release);
        });
    }

    /// The first record of an interrupt that read the inputs posted last,
    /// sleeping until one is queued; records of earlier inputs are
    /// dropped (counted in [`Receiver::stale`]).
    pub fn wait(&mut self) -> Record {
        loop {
            match self.take() {
                Some(r) if r.inputs == self.tag => return r,
                Some(_) => self.stale = self.stale.wrapping_add(1),
                None => cortex_m::asm::wfi(),
            }
        }
    }
}
