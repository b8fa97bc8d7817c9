//! The node path never touches the heap: a counting global allocator sees zero
//! allocations across 10,000 updates (with observations, evictions and a full table).
use entrain::{Config, Law, Node, Observation, Phase};
use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;
use std::sync::atomic::{AtomicUsize, Ordering};

struct Counting;

static ALLOCATIONS: AtomicUsize = AtomicUsize::new(0);
thread_local! {
    static ARMED: Cell<bool> = const { Cell::new(false) };
}

// SAFETY: defers every call to the system allocator unchanged; only counts them.
unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        if ARMED.with(Cell::get) {
            ALLOCATIONS.fetch_add(1, Ordering::Relaxed);
        }
        // SAFETY: same contract as the caller's.
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        // SAFETY: same contract as the caller's.
        unsafe { System.dealloc(ptr, layout) }
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

#[test]
fn ten_thousand_updates_allocate_nothing() {
    let laws = [Law::Linear, Law::Sine];
    let mut nodes: Vec<Node<3>> = laws
        .iter()
        .map(|&law| {
            Node::new(
                Config::builder(1_000_000, 100_000)
                    .law(law)
                    .build()
                    .unwrap(),
                Phase::ZERO,
                0,
            )
        })
        .collect();
    // Make sure the counter itself works: this allocation must be seen.
    ARMED.with(|a| a.set(true));
    let probe = vec![1u8; 16];
    ARMED.with(|a| a.set(false));
    assert_eq!(ALLOCATIONS.swap(0, Ordering::Relaxed), 1);
    drop(probe);

    ARMED.with(|a| a.set(true));
    let mut t = 0u32;
    let mut rejected = 0u32;
    for k in 0..5_000u32 {
        t = t.wrapping_add(100_000);
        for node in nodes.iter_mut() {
            node.advance_to(t);
            for from in 0..4u16 {
                // Neighbour 3 only sometimes, so the table fills, rejects and evicts.
                if from == 3 && k % 7 != 0 {
                    continue;
                }
                let obs = Observation {
                    from,
                    phase: Phase::from_counts(k.wrapping_mul(2_654_435_761)),
                    rx_ticks: t,
                    delay_ticks: 50,
                };
                if node.observe(obs).is_err() {
                    rejected += 1;
                }
            }
            let report = node.update(t);
            std::hint::black_box(report);
        }
    }
    ARMED.with(|a| a.set(false));
    assert_eq!(ALLOCATIONS.load(Ordering::Relaxed), 0);
    assert!(rejected > 0, "the full-table path was exercised");
}
