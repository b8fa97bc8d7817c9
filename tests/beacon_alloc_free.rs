//! The beacon path never touches the heap: sending, receiving (accepted and every kind of
//! refusal), signing and verifying, across thousands of frames, make zero allocations.
#![cfg(feature = "beacon")]

use entrain::beacon::{Beacon, BeaconPort, Flags, Frame, FrameV2, MAX_FRAME_LEN};
use entrain::{Config, Node, Phase};
use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;
use std::sync::atomic::{AtomicUsize, Ordering};

/// Passes every request to the system allocator and counts those made while armed on
/// this thread.
struct CountingAllocator;

static COUNT: AtomicUsize = AtomicUsize::new(0);
thread_local! {
    static WATCHING: Cell<bool> = const { Cell::new(false) };
}

// SAFETY: every call goes to `System` with the caller's arguments; only a counter is added.
unsafe impl GlobalAlloc for CountingAllocator {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        if WATCHING.with(Cell::get) {
            COUNT.fetch_add(1, Ordering::Relaxed);
        }
        // SAFETY: the caller upholds `GlobalAlloc::alloc`'s contract, which `System` shares.
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        // SAFETY: `ptr` came from `System.alloc` above with this `layout`.
        unsafe { System.dealloc(ptr, layout) }
    }
}

#[global_allocator]
static ALLOCATOR: CountingAllocator = CountingAllocator;

fn watch(on: bool) {
    WATCHING.with(|w| w.set(on));
}

#[test]
fn send_and_receive_allocate_nothing() {
    let config = Config::builder(1_000_000, 100_000).build().unwrap();
    let mut ports: Vec<BeaconPort<2>> = (0..3u16)
        .map(|id| {
            BeaconPort::new(
                Node::new(config, Phase::from_counts(u32::from(id) << 28), 0),
                id,
                0,
            )
        })
        .collect();
    #[cfg(feature = "mac")]
    let key = entrain::beacon::NetworkKey::from_bytes([0x5c; 16]);
    #[cfg(feature = "mac")]
    ports.push(BeaconPort::with_key(
        Node::new(config, Phase::ZERO, 0),
        9,
        0,
        key,
    ));

    // The counter must see an allocation made while watching.
    watch(true);
    let probe = Box::new(7u64);
    watch(false);
    assert_eq!(COUNT.swap(0, Ordering::Relaxed), 1);
    drop(probe);

    let mut wire = [0u8; MAX_FRAME_LEN];
    let mut len = 0;
    let mut accepted = 0u32;
    let mut refused = 0u32;
    watch(true);
    for k in 0..3_000u32 {
        let t = k.wrapping_mul(33_331);
        let sender = (k % 3) as usize;
        if let Some(p) = ports.get_mut(sender) {
            len = p.send(t, &mut wire).unwrap().wire_len();
        }
        for (i, p) in ports.iter_mut().enumerate() {
            if i == sender {
                continue;
            }
            // The frame, a damaged copy, a duplicate, and noise.
            let mut damaged = wire;
            damaged[(k as usize) % len] ^= 0x20;
            for bytes in [
                &wire[..len],
                &damaged[..len],
                &wire[..len],
                &wire[..k as usize % len],
            ] {
                match p.receive(bytes, t.wrapping_add(40), 40) {
                    Ok(_) => accepted += 1,
                    Err(_) => refused += 1,
                }
            }
            if k % 10 == 0 {
                p.node_mut().update(t.wrapping_add(50));
            }
        }
        #[cfg(feature = "mac")]
        {
            let signed = Frame {
                from: 4,
                seq: k,
                phase_counts: k.wrapping_mul(2_654_435_761),
                trim_ppb: 0,
                flags: Flags::NONE,
            }
            .to_bytes_signed(&key);
            let _ = Frame::decode_verified(&signed, &key);
            let signed = FrameV2 {
                tx_ticks: k,
                ..FrameV2::default()
            }
            .to_bytes_signed(&key);
            let _ = Beacon::decode_verified(&signed, &key);
        }
        let plain = Frame {
            flags: Flags::PINNED,
            ..Frame::default()
        };
        let _ = Frame::decode(&plain.to_bytes());
    }
    watch(false);
    assert_eq!(
        COUNT.load(Ordering::Relaxed),
        0,
        "allocations on the beacon path"
    );
    assert!(
        accepted > 0 && refused > accepted,
        "{accepted} accepted, {refused} refused"
    );
}
