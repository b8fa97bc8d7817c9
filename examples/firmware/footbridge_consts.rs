// Node-law constants for "Footbridge handrail vibration string", written by `entrain tune` from footbridge.toml.
// Constants format 1. Units: timer ticks, Q16.16 gains, phase counts (2^32 = one turn), ppb.
// Use: `mod sync_consts { include!("this_file.rs"); }` then `sync_consts::CONFIG`.

/// Timer ticks per phase turn (1000000 Hz timer, 0.001 s turn).
pub const TICKS_PER_PERIOD: u32 = 1000;
/// Timer ticks between updates (10 Hz updates).
pub const UPDATE_TICKS: u32 = 100000;
/// Proportional gain per update, Q16.16 raw (0.233307).
pub const KP_Q16: u32 = 15290;
/// Integral (rate-trim) gain per update, Q16.16 raw (0.004669).
pub const KI_Q16: u32 = 306;
/// Largest phase step per update, counts (0.062500 turn).
pub const SLEW_LIMIT_COUNTS: u32 = 268435456;
/// Largest rate trim either way, parts per billion.
pub const TRIM_LIMIT_PPB: u32 = 200000;
/// Silence before a neighbour is dropped, timer ticks (5 updates).
pub const TIMEOUT_TICKS: u32 = 500000;
/// Coupling law.
pub const LAW: entrain::Law = entrain::Law::Sine;
/// The node configuration; a value the node law refuses fails the build.
pub const CONFIG: entrain::Config = match entrain::Config::builder(TICKS_PER_PERIOD, UPDATE_TICKS)
    .kp(entrain::Gain::from_q16(KP_Q16))
    .ki(entrain::Gain::from_q16(KI_Q16))
    .law(LAW)
    .slew_limit(SLEW_LIMIT_COUNTS)
    .trim_limit_ppb(TRIM_LIMIT_PPB)
    .timeout_ticks(TIMEOUT_TICKS)
    .build()
{
    Ok(config) => config,
    Err(_) => panic!("entrain: these constants do not make a valid node configuration"),
};
