//! The hot loop does not allocate per event: count heap allocations made
//! while a warmed-up simulation runs on. This one test drives the engine
//! in-process, since it needs a counting global allocator around it.

#[path = "e2e/common.rs"]
mod common;

use std::alloc::{GlobalAlloc, Layout, System};
use std::sync::atomic::{AtomicU64, Ordering};

struct Counting;

static ALLOCS: AtomicU64 = AtomicU64::new(0);

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        ALLOCS.fetch_add(1, Ordering::Relaxed);
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) }
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        ALLOCS.fetch_add(1, Ordering::Relaxed);
        unsafe { System.realloc(ptr, layout, new_size) }
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

#[test]
fn steady_state_runs_without_allocating() {
    for receiver in ["type1", "type2"] {
        let bus = common::Bus {
            slaves: 12,
            spacing_m: 0.15,
            rate_per_s: 5_000.0,
            receiver,
            duration: "60 ms",
            ..common::Bus::default()
        };
        let spec = halfwire::scenario::parse_str(&bus.toml(), "alloc.toml").expect("valid");
        let mut sim = halfwire::engine::Simulation::new(&spec, halfwire::scheme::build(&spec));
        sim.run_until(halfwire::units::Picos::from_ms(20));
        let events_before = sim.events();
        let before = ALLOCS.load(Ordering::Relaxed);
        sim.run_until(halfwire::units::Picos::from_ms(60));
        let allocs = ALLOCS.load(Ordering::Relaxed) - before;
        let events = sim.events() - events_before;
        eprintln!("{receiver}: {allocs} allocations during {events} events");
        assert!(events > 100_000, "{events} events");
        // A histogram may still grow by an order of magnitude, or a queue by a
        // burst; a few dozen allocations over 100 000+ events is not per event.
        assert!(allocs < 50, "{receiver}: {allocs} allocations in {events} events");
    }
}
