//! Tiltyard's engine: datasets, the Bayesian VAR, exact conditional forecasts under pins,
//! corridors and drivers, and the scenario checks; and, with the `gui` feature, the scenario
//! window ([`app`]), which only uses the engine (nothing in the engine depends on it).

/// Ask the C library's allocator to keep freed memory for reuse. The engine makes and drops
/// matrices of a few hundred kilobytes for every posterior draw on every thread; by default
/// glibc hands such memory back to the system as soon as a few of them are freed together, and
/// the next draw takes page faults to get it again (a tenth of a run at 20 series). Called
/// once at start by the programs (the window and the headless commands, the benchmark).
pub fn keep_freed_memory() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    // SAFETY: `mallopt` only sets two of the allocator's parameters; called before any
    // threads are started.
    unsafe {
        libc::mallopt(libc::M_TRIM_THRESHOLD, 256 << 20);
        libc::mallopt(libc::M_MMAP_THRESHOLD, 32 << 20);
    }
}

#[cfg(feature = "gui")]
pub mod app;
pub mod attribution;
pub mod checks;
pub mod compare;
pub mod crosscheck;
pub mod dataset;
pub mod entropic;
pub mod forecast;
pub mod least_norm;
pub mod model;
pub mod pipeline;
pub mod report;
pub mod reverse;
pub mod run;
pub mod scenario;
pub mod targets;
pub mod truncnorm;
