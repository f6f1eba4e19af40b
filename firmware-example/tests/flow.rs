//! Flow meter and calorimeter: pulses over a gate to m³/s, and heat out
//! from flow and the two coolant temperatures.

use heatbound_firmware_example::drivers::TemperatureSource;
use heatbound_firmware_example::drivers::flow::{
    Calorimeter, CalorimeterError, FlowError, FlowMeter, HeatOut, NoHeatOut, PulseCounter,
    volume_flow_m3_s,
};

struct Pulses(u32);

impl PulseCounter for Pulses {
    fn take(&mut self) -> u32 {
        self.0
    }
}

struct Fixed(Result<f32, &'static str>);

impl TemperatureSource for Fixed {
    type Error = &'static str;
    fn read_c(&mut self) -> Result<f32, Self::Error> {
        self.0
    }
}

#[test]
fn pulses_to_volume_flow() {
    // 3 L/min through a 450 pulses/L meter is 22.5 pulses/s: 225 in 10 s.
    let q = volume_flow_m3_s(225, 10_000, 450.0).unwrap();
    assert!((q - 5e-5).abs() < 1e-12);
    assert_eq!(volume_flow_m3_s(0, 100, 450.0), Ok(0.0));
    assert_eq!(volume_flow_m3_s(1, 0, 450.0), Err(FlowError::NoInterval));
    assert_eq!(volume_flow_m3_s(1, 100, 0.0), Err(FlowError::BadKFactor));
    assert_eq!(
        volume_flow_m3_s(1, 100, f32::NAN),
        Err(FlowError::BadKFactor)
    );
}

#[test]
fn gate_slides_over_the_last_intervals() {
    let mut meter = FlowMeter::<3>::new(100.0);
    assert_eq!(meter.record(1_000, 99), None);
    for (t, p) in [(1_100, 1), (1_200, 2), (1_300, 3), (1_400, 4)] {
        meter.record(t, p);
    }
    // The gate holds 2 + 3 + 4 pulses over 300 ms.
    let q = meter.flow_m3_s().unwrap().unwrap();
    assert!((q - 9.0 / 100.0 / 300.0).abs() < 1e-12);
    // Across the u32 wrap of the millisecond counter.
    let mut meter = FlowMeter::<1>::new(100.0);
    meter.record(u32::MAX - 49, 0);
    let q = meter.record(50, 10).unwrap().unwrap();
    assert!((q - 10.0 / 100.0 / 100.0).abs() < 1e-12);
}

#[test]
fn calorimeter_matches_the_core_heat_flow() {
    // 22.5 pulses/s = 3 L/min, 20 → 30 °C: 2086.9 W (the core's
    // heat_flow_volumetric_w example, IAPWS-95 water properties).
    let mut cal =
        Calorimeter::<_, _, _, 4>::new(Pulses(9), 450.0, Fixed(Ok(20.0)), Fixed(Ok(30.0)));
    cal.start(0);
    let q = cal.heat_out_w(400).unwrap().unwrap();
    assert!((q - 2086.9).abs() < 1.0, "{q}");
}

#[test]
fn standing_water_carries_no_heat() {
    // No pulses: 0 W even with the outlet above the water range (boiling).
    let mut cal =
        Calorimeter::<_, _, _, 4>::new(Pulses(0), 450.0, Fixed(Ok(18.0)), Fixed(Ok(120.0)));
    cal.start(0);
    assert_eq!(cal.heat_out_w(100), Ok(Some(0.0)));
}

#[test]
fn calorimeter_failures_are_errors_not_none() {
    // Not started: the first reading has no interval; an error, so the
    // monitor does not conclude that heat out is unmeasured.
    let mut cal =
        Calorimeter::<_, _, _, 4>::new(Pulses(5), 450.0, Fixed(Ok(18.0)), Fixed(Ok(22.0)));
    assert_eq!(
        cal.heat_out_w(0),
        Err(CalorimeterError::Flow(FlowError::NoInterval))
    );
    assert!(cal.heat_out_w(100).unwrap().is_some());

    let mut cal =
        Calorimeter::<_, _, _, 4>::new(Pulses(5), 450.0, Fixed(Err("open")), Fixed(Ok(22.0)));
    cal.start(0);
    assert_eq!(cal.heat_out_w(100), Err(CalorimeterError::Inlet("open")));

    let mut cal =
        Calorimeter::<_, _, _, 4>::new(Pulses(5), 450.0, Fixed(Ok(18.0)), Fixed(Ok(150.0)));
    cal.start(0);
    assert!(matches!(
        cal.heat_out_w(100),
        Err(CalorimeterError::Conversion(_))
    ));

    assert_eq!(NoHeatOut.heat_out_w(0), Ok(None));
}
