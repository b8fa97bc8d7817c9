//! Helpers of the simulator tests.

use entrain::{Config, Gain, Law};

/// A node law with a 10,000-tick phase period and update interval (1 MHz timers: 10 ms,
/// 100 updates a second) and the given gains.
pub fn config(law: Law, kp: f32, ki: f32) -> Config {
    Config::builder(10_000, 10_000)
        .law(law)
        .kp(Gain::from_f32(kp).unwrap())
        .ki(Gain::from_f32(ki).unwrap())
        .build()
        .unwrap()
}

/// A rayon pool of `threads` threads.
pub fn pool(threads: usize) -> rayon::ThreadPool {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap()
}
