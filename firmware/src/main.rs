//! Example firmware: one steadycal monitor on a Cortex-M4F board (QEMU `mps2-an386`).
//!
//! It reads the device log embedded in flash (see build.rs and [`log`]) with the core's
//! record reader and pushes every sample through `Monitor<f32>` with the configuration
//! build.rs compiled in from a TOML file (the one `steadycal replay --precision f32
//! --config FILE` runs; [`config`]), prints each event as
//! one canonical line over semihosting (see [`lines`]) and checks it against the event the
//! log holds for that sample, appends it to the event log on the board's (RAM-backed) NOR
//! flash, saves a snapshot through the core's two-slot store every
//! [`storage::SNAPSHOT_EVERY`] samples and once at the end, loads it back and restores
//! from it (see [`persist`]), then prints instruction counts per push and a summary line,
//! and exits with semihosting's exit status: 0 when the whole feed ran, 1 otherwise.
//!
//! Instruction counts come from SysTick on the core clock: under QEMU with
//! `-icount shift=0` one instruction takes 1 ns of virtual time and the board's 25 MHz
//! clock ticks once per 40 instructions, deterministically. The firmware checks that ratio
//! itself on a loop of known length and prints it (`counter` line).
#![no_std]
#![no_main]

mod board;
mod channel;
mod config;
mod counter;
mod lines;
mod log;
mod persist;
mod sqrt_check;
mod storage;

use core::fmt::Write;

use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hio};
use heapless::String;
use steadycal_core::event::Severity;
use steadycal_core::hal::{ActiveLevel, AlarmOutput};
use steadycal_core::sample::Flags;

use crate::channel::Channel;
use crate::counter::{Counter, Tally};

type Line = String<320>;

/// Own events waiting for the logged event they must equal (one push raises at most the
/// queue's capacity, 8, before the log's copies follow).
type Pending = heapless::Deque<steadycal_core::event::Event<f32>, 16>;

/// Writes one line over semihosting (one host call per line).
fn emit(line: &Line) {
    if let Ok(mut out) = hio::hstdout() {
        let _ = out.write_all(line.as_bytes());
        let _ = out.write_all(b"\n");
    }
}

fn say(args: core::fmt::Arguments) {
    let mut line = Line::new();
    let _ = line.write_fmt(args);
    emit(&line);
}

fn run() -> Result<(), &'static str> {
    let peripherals = cortex_m::Peripherals::take().ok_or("peripherals taken")?;
    let counter = Counter::start(peripherals.SYST);
    let (loop_instructions, loop_ticks) = counter.calibrate();
    say(format_args!(
        "counter instructions={loop_instructions} ticks={loop_ticks}"
    ));

    let (sqrt_inputs, sqrt_mismatches) = sqrt_check::run();
    say(format_args!(
        "sqrt_check inputs={sqrt_inputs} mismatches={sqrt_mismatches}"
    ));

    let mut monitor = Channel::new()?;
    // User LED 0 lit while a warning or an alarm is raised.
    let mut alarm_led = AlarmOutput::new(board::UserLed0::new(), ActiveLevel::High, Severity::Warn)
        .map_err(|_| "alarm output")?;
    let mut lit_pushes: u32 = 0;
    let mut feed = log::LogReader::new(log::IMAGE)?;
    let mut persist = persist::Persist::new()?;
    let mut pending = Pending::new();
    let mut logged_matched: u32 = 0;
    let mut logged_unmatched: u32 = 0;

    let mut warming_checks = Tally::default();
    let mut live_checks = Tally::default();
    let mut readings = Tally::default();
    let mut rejected = Tally::default();
    let mut events: u64 = 0;
    let mut digest = ReadingDigest::new();
    let mut pushed: u32 = 0;
    for item in feed.by_ref() {
        let sample = match item {
            log::Item::Sample(sample) => sample,
            log::Item::Event(frame) => {
                match pending.pop_front() {
                    Some(own) if log::same_frame(&own, frame) => logged_matched += 1,
                    _ => logged_unmatched += 1,
                }
                continue;
            }
        };
        logged_unmatched += pending.len() as u32;
        pending.clear();
        let before = counter.now();
        let outcome = monitor.push(&sample);
        let ticks = counter.since(before);
        pushed += 1;
        let tally = if outcome.flags.contains(Flags::REJECTED) {
            &mut rejected
        } else if sample.reference.is_none() {
            &mut readings
        } else if outcome.flags.contains(Flags::WARMING_UP) {
            &mut warming_checks
        } else {
            &mut live_checks
        };
        tally.add(ticks);
        let _ = alarm_led.update(&outcome);
        if alarm_led.pin().is_lit() {
            lit_pushes += 1;
        }
        if sample.reference.is_none() {
            digest.add(
                sample.seq,
                outcome
                    .reading()
                    .map(|r| [r.value, r.standard_uncertainty, r.expanded_uncertainty]),
            );
        }
        while let Some(event) = monitor.pop_event() {
            events += 1;
            let mut line = Line::new();
            let _ = lines::event_line(&mut line, &event, sample.t);
            emit(&line);
            persist.log_event(&event)?;
            if pending.push_back(event).is_err() {
                logged_unmatched += 1;
            }
        }
        if pushed.is_multiple_of(storage::SNAPSHOT_EVERY) {
            persist.save(&mut monitor, &counter)?;
        }
    }
    logged_unmatched += pending.len() as u32;
    say(format_args!(
        "device_log_in bytes={} crc={:08x} frames={} sessions={} samples={} logged_events={} matched={logged_matched} unmatched={logged_unmatched} damaged={}",
        log::IMAGE.len(),
        steadycal_core::snapshot::CRC32.checksum(log::IMAGE),
        feed.frames_read,
        feed.sessions,
        feed.samples,
        feed.events,
        feed.damaged
    ));
    if pushed != feed.samples || feed.damaged > 0 {
        return Err("device log: damaged frames");
    }

    for (name, tally) in [
        ("check_warming_up", &warming_checks),
        ("check_live", &live_checks),
        ("reading", &readings),
        ("rejected", &rejected),
    ] {
        say(format_args!(
            "timing {name} pushes={} ticks={} max_ticks={} min_ticks={}",
            tally.pushes,
            tally.ticks,
            tally.max,
            tally.min_or_zero()
        ));
    }
    say(format_args!(
        "memory monitor_bytes={}",
        Channel::MONITOR_BYTES
    ));
    say(format_args!(
        "alarm_output severity=warn lit_pushes={lit_pushes}"
    ));
    say(format_args!(
        "readings count={} digest={:016x}",
        digest.count, digest.state
    ));

    let counters = monitor.counters();
    let params = monitor.parameters();
    let mut line = Line::new();
    let _ = write!(
        line,
        "summary samples={} checks={} readings={} rejected={} below_origin={} provisional_readings={} rung={} events={} events_dropped={}",
        counters.samples,
        counters.checks,
        counters.readings,
        counters.rejected,
        counters.below_origin,
        counters.provisional_readings,
        monitor.rung().name(),
        events,
        monitor.events_dropped()
    );
    for (key, value) in ["offset", "gain", "quadratic", "temperature"]
        .into_iter()
        .zip(params)
    {
        let _ = lines::put_f32(&mut line, key, value);
    }
    emit(&line);

    say(format_args!(
        "memory stack_peak_feed_bytes={} (monitor, store calls and event log included; before the restore check)",
        board::stack_used()
    ));
    persist.finish(&mut monitor, &counter)?;
    Ok(())
}

/// FNV-1a (64-bit) over every reading sample: seq, then the bits of value, standard and
/// expanded uncertainty (or a single 0xff byte when no reading was made). The host computes
/// the same over `steadycal replay --readings`.
struct ReadingDigest {
    state: u64,
    count: u32,
}

impl ReadingDigest {
    fn new() -> Self {
        ReadingDigest {
            state: 0xcbf2_9ce4_8422_2325,
            count: 0,
        }
    }

    fn bytes(&mut self, bytes: &[u8]) {
        for byte in bytes {
            self.state = (self.state ^ u64::from(*byte)).wrapping_mul(0x0000_0100_0000_01b3);
        }
    }

    fn add(&mut self, seq: u64, reading: Option<[f32; 3]>) {
        self.count += 1;
        self.bytes(&seq.to_le_bytes());
        match reading {
            Some(values) => values
                .iter()
                .for_each(|v| self.bytes(&v.to_bits().to_le_bytes())),
            None => self.bytes(&[0xff]),
        }
    }
}

#[entry]
fn main() -> ! {
    board::paint_stack();
    let status = match run() {
        Ok(()) => debug::EXIT_SUCCESS,
        Err(message) => {
            say(format_args!("error {message}"));
            debug::EXIT_FAILURE
        }
    };
    say(format_args!(
        "memory stack_peak_bytes={} (painted {})",
        board::stack_used(),
        board::PAINTED
    ));
    debug::exit(status);
    loop {
        cortex_m::asm::wfi();
    }
}

#[panic_handler]
fn panic(info: &core::panic::PanicInfo) -> ! {
    let mut line = Line::new();
    let _ = write!(line, "panic {info}");
    emit(&line);
    debug::exit(debug::EXIT_FAILURE);
    loop {
        cortex_m::asm::wfi();
    }
}
