//! The App against the simulated rig at the bus level: the real drivers
//! reading simulated MAX31855 and INA226 chips, the trip pin, the UART
//! stream decoded by the host's decoder, and injected bus faults.

use std::cell::RefCell;

use heatbound::alarm::{EventKind, RuleId};
use heatbound::config::RigConfig;
use heatbound::monitor::{Monitor, Pushed};
use heatbound::wire::{Decoder, Frame, LinkTracker, MAX_FRAME_LEN, RigId};
use heatbound_firmware_example::app::{App, AppConfig, Tick};
use heatbound_firmware_example::drivers::max31855::Max31855Fault;
use heatbound_firmware_example::rig::Scenario;
use heatbound_firmware_example::sim_bus::{SimApp, SimBench, SimDevice, sim_devices};

const DT_MS: u32 = 100;
const UART_BYTES: usize = 4096;

/// A run: the bench, the App on it, and the host side of the UART.
struct Run<'a> {
    bench: &'a RefCell<SimBench>,
    app: SimApp<'a, UART_BYTES, 64>,
    decoder: Decoder<MAX_FRAME_LEN>,
    frames: Vec<Frame>,
    t_ms: u32,
}

impl<'a> Run<'a> {
    fn new(bench: &'a RefCell<SimBench>) -> Self {
        Self::with_config(bench, RigConfig::default())
    }

    fn with_config(bench: &'a RefCell<SimBench>, rig: RigConfig) -> Self {
        let config = AppConfig::bench(rig, RigId::new("sim-bench").unwrap());
        let mut app = App::new(&config, sim_devices(bench)).expect("valid config");
        // Boot at t = 0, first sample one period later, as on the board.
        bench.borrow_mut().advance_to(0);
        app.start(0);
        let mut run = Run {
            bench,
            app,
            decoder: Decoder::new(),
            frames: Vec::new(),
            t_ms: DT_MS,
        };
        run.drain();
        run
    }

    fn drain(&mut self) {
        let frames = &mut self.frames;
        self.decoder.feed(self.app.uart().bytes(), |r| {
            frames.push(r.expect("no loss on the wire"))
        });
        self.app.uart_mut().clear();
    }

    /// One sample at the current time, then time moves on.
    fn step(&mut self) -> Tick {
        self.bench.borrow_mut().advance_to(self.t_ms);
        let tick = self.app.tick(self.t_ms);
        self.drain();
        self.t_ms += DT_MS;
        tick
    }

    /// Steps while `t_ms <= until_ms`.
    fn run_to(&mut self, until_ms: u32) {
        while self.t_ms <= until_ms {
            self.step();
        }
    }

    /// Steps until `pred` holds (at most to `limit_ms`); the time it held.
    fn run_until(&mut self, limit_ms: u32, mut pred: impl FnMut(&Self) -> bool) -> Option<u32> {
        while self.t_ms <= limit_ms {
            let t = self.t_ms;
            self.step();
            if pred(self) {
                return Some(t);
            }
        }
        None
    }

    fn events(&self) -> Vec<(u32, RuleId, EventKind)> {
        self.frames
            .iter()
            .filter_map(|f| match f {
                Frame::Event(e) => Some((e.event.t_ms, e.event.rule, e.event.kind)),
                _ => None,
            })
            .collect()
    }

    fn first(&self, rule: RuleId, kind: EventKind) -> Option<u32> {
        self.events()
            .into_iter()
            .find(|&(_, r, k)| r == rule && k == kind)
            .map(|(t, _, _)| t)
    }
}

#[test]
fn steady_run_reads_the_rig_through_the_buses() {
    let bench = RefCell::new(SimBench::bench_stirling(Scenario::Steady, 1));
    let mut run = Run::new(&bench);
    let mut worst = [0.0f32; 5];
    for _ in 0..=600 {
        let t_ms = run.t_ms;
        let tick = run.step();
        let truth = bench.borrow().rig().sample(t_ms);
        let s = tick.sample;
        assert!(!matches!(tick.pushed, Pushed::Invalid(_)), "{tick:?}");
        if t_ms < 2_000 {
            continue; // the flow meter's 1 s gate fills first
        }
        let q_out = s.heat_out_w.expect("heat out is measured");
        for (w, d) in worst.iter_mut().zip([
            s.t_hot_k - truth.t_hot_k,
            s.t_cold_k - truth.t_cold_k,
            (s.heat_in_w - truth.heat_in_w) / truth.heat_in_w,
            (s.work_w - truth.work_w) / truth.work_w,
            (q_out - truth.heat_out_w.unwrap()) / truth.heat_out_w.unwrap(),
        ]) {
            *w = w.max(d.abs());
        }
    }
    // Bus-level quantisation against the rig's own Sample: 0.25 °C (plus
    // the cold junction's 0.0625 °C) on the thermocouples, INA226 LSBs on
    // the powers, one pulse per 1 s gate on the flow.
    println!("worst deviation from the rig's own Sample (K, K, rel, rel, rel): {worst:?}");
    assert!(worst[0] < 0.2 && worst[1] < 0.2, "{worst:?}");
    assert!(worst[2] < 1e-3 && worst[3] < 2e-3, "{worst:?}");
    assert!(worst[4] < 0.15, "{worst:?}");

    let stats = *run.app.stats();
    for c in [
        stats.hot,
        stats.cold,
        stats.heater,
        stats.generator,
        stats.heat_out,
    ] {
        assert_eq!(c.failures(), 0, "{stats:?}");
    }
    assert_eq!(run.app.monitor().invalid_samples(), 0);
    assert!(run.events().is_empty(), "{:?}", run.events());
    assert!(!run.app.trip_pin().is_high());
    // Both INA226s were programmed with the App's calibration.
    let b = bench.borrow();
    assert_eq!(b.ina226_calibration(SimDevice::HeaterMonitor), Some(5120));
    assert_eq!(
        b.ina226_calibration(SimDevice::GeneratorMonitor),
        Some(5120)
    );
}

#[test]
fn uart_stream_is_hello_then_summaries_without_loss() {
    let bench = RefCell::new(SimBench::bench_stirling(Scenario::Steady, 2));
    let mut run = Run::new(&bench);
    run.run_to(130_000);
    assert!(
        matches!(run.frames.first(), Some(Frame::Hello(h)) if h.rig_id.as_str() == "sim-bench")
    );
    let mut link = LinkTracker::default();
    for f in &run.frames {
        link.observe(f);
    }
    let stats = link.stats();
    // One summary per second of sample time, a Hello at start and every minute.
    assert_eq!(stats.summaries, 130);
    assert_eq!(stats.hellos, 3);
    assert_eq!(
        stats.missing_summaries + stats.duplicates + stats.restarts,
        0
    );
    assert_eq!(run.decoder.stats().losses(), 0);
    assert_eq!(run.app.stats().uart_errors, 0);
    assert_eq!(run.app.stats().encode_errors, 0);
    let Some(Frame::Summary(s)) = run
        .frames
        .iter()
        .rev()
        .find(|f| matches!(f, Frame::Summary(_)))
    else {
        panic!("no summary");
    };
    assert!(s.status.heat_out_measured && !s.status.trip_active && !s.status.any_fault);
    assert!(
        s.performance().is_some_and(|eta| eta > 0.1 && eta < 0.25),
        "{s:?}"
    );
}

#[test]
fn thermocouple_drift_trips_latches_and_resets_only_after_clear_and_acknowledge() {
    let bench = RefCell::new(SimBench::bench_stirling(Scenario::ThermocoupleDrift, 1));
    let mut run = Run::new(&bench);
    let tripped = run
        .run_until(700_000, |r| r.app.trip_pin().is_high())
        .expect("the trip pin goes high");
    // Either second-law rule may trip first; both follow within moments.
    run.run_until(tripped + 5_000, |r| {
        r.first(RuleId::BeyondCarnot, EventKind::Raised).is_some()
    });
    let raised = run
        .first(RuleId::BeyondCarnot, EventKind::Raised)
        .expect("beyond_carnot raised");
    println!(
        "beyond_carnot raised at {raised} ms, trip pin high at {tripped} ms; events {:?}",
        run.events()
    );
    // The rig's own timeline (tests/rig_scenarios.rs): about 500 s.
    assert!((480_000..=520_000).contains(&raised), "{raised}");
    assert!(
        tripped
            >= raised.min(
                run.first(RuleId::NegativeEntropyProduction, EventKind::Raised)
                    .unwrap_or(u32::MAX)
            )
    );
    assert!(run.app.alarms().is_active(RuleId::BeyondCarnot));

    // An operator acknowledges while the condition still holds: the trip stays.
    run.run_to(tripped + 2_000);
    run.app.acknowledge_all(run.t_ms);
    run.drain();
    run.run_to(tripped + 20_000);
    assert!(run.app.trip_pin().is_high());

    // The thermocouple is replaced; the readings recover.
    let repair_ms = run.t_ms + 1_000;
    bench.borrow_mut().repair_at(repair_ms);
    run.run_to(repair_ms + 60_000);
    // Acknowledged before it cleared, so it resets when it clears.
    assert!(!run.app.alarms().trip_active(), "{:?}", run.events());
    assert!(!run.app.trip_pin().is_high());

    // A second drift cannot happen with the repaired rig, so check the
    // other order with a fresh run: clear first, then acknowledge.
    let bench = RefCell::new(SimBench::bench_stirling(Scenario::ThermocoupleDrift, 1));
    let mut run = Run::new(&bench);
    let tripped = run
        .run_until(700_000, |r| r.app.trip_pin().is_high())
        .expect("trip");
    bench.borrow_mut().repair_at(tripped + 5_000);
    run.run_to(tripped + 90_000);
    // The condition has cleared, but the latched trip holds the pin high.
    assert!(
        run.first(RuleId::BeyondCarnot, EventKind::Cleared)
            .is_none()
    );
    assert!(run.app.trip_pin().is_high(), "{:?}", run.events());
    assert!(run.app.alarms().is_active(RuleId::BeyondCarnot));
    let t_ack = run.t_ms;
    assert!(run.app.acknowledge_all(t_ack) >= 2);
    run.drain();
    assert!(!run.app.trip_pin().is_high());
    assert_eq!(
        run.first(RuleId::BeyondCarnot, EventKind::Acknowledged),
        Some(t_ack)
    );
    assert_eq!(
        run.first(RuleId::BeyondCarnot, EventKind::Cleared),
        Some(t_ack)
    );
    run.run_to(t_ack + 10_000);
    assert!(!run.app.trip_pin().is_high());
    assert_eq!(run.app.trip_pin().rises(), 1);
    assert_eq!(run.app.trip_pin().falls(), 1);
    assert_eq!(run.decoder.stats().losses(), 0);
}

#[test]
fn spi_errors_on_the_hot_converter_are_counted_and_raise_sensor_fault() {
    let bench = RefCell::new(SimBench::bench_stirling(Scenario::Steady, 3));
    // Reads 600..700: 10 s of sample time from t = 60 s, twice the 5 s delay.
    bench
        .borrow_mut()
        .inject_bus_errors(SimDevice::HotThermocouple, 600, 100);
    let mut run = Run::new(&bench);
    run.run_to(90_000);
    let stats = *run.app.stats();
    assert_eq!(stats.hot.bus_errors, 100, "{stats:?}");
    assert_eq!(stats.hot.faults, 0);
    assert_eq!(
        stats.cold.failures() + stats.heater.failures() + stats.generator.failures(),
        0
    );
    assert_eq!(run.app.monitor().invalid_samples(), 100);
    let raised = run
        .first(RuleId::SensorFault, EventKind::Raised)
        .expect("sensor_fault raised");
    assert!((64_900..=65_100).contains(&raised), "{raised}");
    assert!(run.first(RuleId::SensorFault, EventKind::Cleared).is_some());
    // sensor_fault is a warning: no trip.
    assert_eq!(run.app.trip_pin().rises(), 0);
    // The faults travelled in the summaries too.
    assert!(
        run.frames
            .iter()
            .any(|f| matches!(f, Frame::Summary(s) if s.status.any_fault))
    );
}

#[test]
fn open_thermocouple_reads_nan_and_raises_sensor_fault() {
    let bench = RefCell::new(SimBench::bench_stirling(Scenario::OpenThermocouple, 1));
    let mut run = Run::new(&bench);
    run.run_to(119_900);
    assert_eq!(run.app.stats().hot.faults, 0);
    let tick = run.step();
    assert!(tick.sample.t_hot_k.is_nan());
    run.run_to(130_000);
    assert_eq!(run.app.stats().hot.faults, 101);
    assert_eq!(run.app.stats().hot.bus_errors, 0);
    // The rig's timeline: 125.0 s (the 5 s on-delay).
    assert_eq!(
        run.first(RuleId::SensorFault, EventKind::Raised),
        Some(125_000)
    );

    // Forced fault bits on the cold converter count the same way.
    bench.borrow_mut().set_thermocouple_fault(
        SimDevice::ColdThermocouple,
        Some(Max31855Fault {
            short_gnd: true,
            ..Default::default()
        }),
    );
    let tick = run.step();
    assert!(tick.sample.t_cold_k.is_nan());
    assert_eq!(run.app.stats().cold.faults, 1);
}

#[test]
fn i2c_errors_are_counted_and_the_chip_is_reprogrammed() {
    let bench = RefCell::new(SimBench::bench_stirling(Scenario::Steady, 4));
    let mut run = Run::new(&bench);
    run.run_to(10_000);
    let before = bench.borrow().transfers(SimDevice::HeaterMonitor);
    bench
        .borrow_mut()
        .inject_bus_errors(SimDevice::HeaterMonitor, before, 3);
    // First tick: the bus-voltage read fails. Next ticks: the re-init's id
    // reads fail twice, then the chip is programmed again and read.
    for _ in 0..3 {
        let tick = run.step();
        assert!(tick.sample.heat_in_w.is_nan());
    }
    let tick = run.step();
    assert!((tick.sample.heat_in_w - 500.0).abs() < 10.0, "{tick:?}");
    assert_eq!(run.app.stats().heater.bus_errors, 3);
    assert_eq!(run.app.stats().generator.failures(), 0);
    assert_eq!(
        bench.borrow().ina226_calibration(SimDevice::HeaterMonitor),
        Some(5120)
    );
}

#[test]
fn a_full_uart_is_counted_not_a_panic() {
    let bench = RefCell::new(SimBench::bench_stirling(Scenario::Steady, 5));
    let config = AppConfig::bench(RigConfig::default(), RigId::new("tiny-uart").unwrap());
    let mut app = App::<_, _, _, _, _, _, 64>::new(&config, sim_devices::<200>(&bench)).unwrap();
    for i in 0..=100 {
        bench.borrow_mut().advance_to(i * DT_MS);
        app.tick(i * DT_MS);
    }
    let stats = app.stats();
    assert!(
        stats.frames_sent >= 1 && stats.uart_errors >= 5,
        "{stats:?}"
    );
    assert!(app.uart().bytes().len() <= 200);
}

#[test]
fn ram_sizes() {
    let app = core::mem::size_of::<SimApp<'static, 0, 64>>();
    let monitor = core::mem::size_of::<Monitor<64>>();
    let alarms = core::mem::size_of::<heatbound::alarm::AlarmSet>();
    let bench = core::mem::size_of::<SimBench>();
    println!(
        "size_of: App<sim, UART 0 B, N = 64> = {app} B, Monitor<64> = {monitor} B, AlarmSet = {alarms} B, SimBench = {bench} B"
    );
    // The App adds its drivers, counters and Hello to the monitor and alarms,
    // and the downlink its state: the command buffer, the keyed HMAC, the
    // configuration in use and one waiting for the window boundary.
    let config = core::mem::size_of::<RigConfig>();
    let auth = core::mem::size_of::<heatbound::wire::Authenticator>();
    let downlink = heatbound::wire::MAX_COMMAND_LEN + auth + 2 * config;
    println!(
        "downlink: command buffer {} B, HMAC {auth} B, RigConfig {config} B",
        heatbound::wire::MAX_COMMAND_LEN
    );
    let controller = core::mem::size_of::<heatbound::control::Controller<64>>();
    println!("Controller<64> = {controller} B");
    assert!(
        controller < monitor + alarms + downlink + 512,
        "{controller}"
    );
    assert!(app < controller + 512, "{app}");
    assert!(app <= 8 * 1024 + 512, "{app}");
}
