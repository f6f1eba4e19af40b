//! MAX31855 driver: the datasheet's frame examples, the fault bits, bus
//! errors, and the ITS-90 cold-junction compensation, over
//! embedded-hal-mock SPI transactions.

// Binary literals are grouped as the datasheet prints them (14 and 12 bits).
#![allow(clippy::unusual_byte_groupings)]

use embedded_hal::spi::{self, ErrorKind, ErrorType, Operation, SpiDevice};
use embedded_hal_mock::eh1::spi::{Mock, Transaction};
use heatbound::sensor::thermocouple::ThermocoupleType;
use heatbound_firmware_example::drivers::max31855::conversion::{
    Max31855Fault, Max31855Reading, chip_thermocouple_c, decode_frame, encode_frame,
    internal_count, linearized_hot_junction_c, thermocouple_count,
};
use heatbound_firmware_example::drivers::max31855::{Error, Max31855};
use proptest::prelude::*;

/// MAX31855 datasheet, Table 2 (thermocouple temperature data format):
/// temperature and the 14-bit field D31..D18.
const THERMOCOUPLE_TABLE: [(f64, u32); 8] = [
    (1600.00, 0b0110_0100_0000_00),
    (1000.00, 0b0011_1110_1000_00),
    (100.75, 0b0000_0110_0100_11),
    (25.00, 0b0000_0001_1001_00),
    (0.00, 0b0000_0000_0000_00),
    (-0.25, 0b1111_1111_1111_11),
    (-1.00, 0b1111_1111_1111_00),
    (-250.00, 0b1111_0000_0110_00),
];

/// MAX31855 datasheet, Table 3 (reference junction temperature data
/// format): temperature and the 12-bit field D15..D4.
const INTERNAL_TABLE: [(f64, u32); 8] = [
    (127.0000, 0b0111_1111_0000),
    (100.5625, 0b0110_0100_1001),
    (25.0000, 0b0001_1001_0000),
    (0.0000, 0b0000_0000_0000),
    (-0.0625, 0b1111_1111_1111),
    (-1.0000, 0b1111_1111_0000),
    (-20.0000, 0b1110_1100_0000),
    (-55.0000, 0b1100_1001_0000),
];

fn frame(tc_field: u32, cj_field: u32) -> u32 {
    (tc_field << 18) | (cj_field << 4)
}

fn read_transaction(raw: u32) -> [Transaction<u8>; 3] {
    [
        Transaction::transaction_start(),
        Transaction::read_vec(raw.to_be_bytes().to_vec()),
        Transaction::transaction_end(),
    ]
}

#[test]
fn datasheet_thermocouple_encodings_decode() {
    for (t_c, field) in THERMOCOUPLE_TABLE {
        let r = decode_frame(frame(field, 0)).expect("no fault bits");
        assert_eq!(r.thermocouple_c(), t_c, "{field:014b}");
        assert_eq!(thermocouple_count(t_c) as u32 & 0x3FFF, field);
    }
}

#[test]
fn datasheet_internal_encodings_decode() {
    for (t_c, field) in INTERNAL_TABLE {
        let r = decode_frame(frame(0, field)).expect("no fault bits");
        assert_eq!(r.internal_c(), t_c, "{field:012b}");
        assert_eq!(internal_count(t_c) as u32 & 0x0FFF, field);
    }
}

#[test]
fn every_table_pair_reads_through_the_driver() {
    let mut expectations = Vec::new();
    let pairs: Vec<_> = THERMOCOUPLE_TABLE
        .iter()
        .zip(INTERNAL_TABLE.iter())
        .collect();
    for ((_, tc), (_, cj)) in &pairs {
        expectations.extend(read_transaction(frame(*tc, *cj)));
    }
    let mut dev = Max31855::new(Mock::new(&expectations));
    for ((tc_c, _), (cj_c, _)) in &pairs {
        let r = dev.read().expect("fault-free frame");
        assert_eq!((r.thermocouple_c(), r.internal_c()), (*tc_c, *cj_c));
    }
    dev.release().done();
}

#[test]
fn fault_bits_are_reported() {
    let cases = [
        (
            0b001,
            Max31855Fault {
                open: true,
                short_gnd: false,
                short_vcc: false,
            },
        ),
        (
            0b010,
            Max31855Fault {
                open: false,
                short_gnd: true,
                short_vcc: false,
            },
        ),
        (
            0b100,
            Max31855Fault {
                open: false,
                short_gnd: false,
                short_vcc: true,
            },
        ),
        (
            0b110,
            Max31855Fault {
                open: false,
                short_gnd: true,
                short_vcc: true,
            },
        ),
    ];
    let mut expectations = Vec::new();
    for (bits, _) in cases {
        // D16 plus the cause; the temperature fields of a fault frame carry
        // whatever the chip had (here 25 °C / 25 °C).
        expectations.extend(read_transaction(
            frame(0b0000_0001_1001_00, 0b0001_1001_0000) | 1 << 16 | bits,
        ));
    }
    let mut dev = Max31855::new(Mock::new(&expectations));
    for (_, fault) in cases {
        assert_eq!(dev.read(), Err(Error::Fault(fault)));
    }
    dev.release().done();
    // Reserved bits D17 and D3 are ignored.
    assert!(decode_frame(1 << 17 | 1 << 3).is_ok());
    // D16 without a cause, and a cause without D16, are still faults.
    assert_eq!(decode_frame(1 << 16), Err(Max31855Fault::default()));
    assert_eq!(decode_frame(0b001), Err(Max31855Fault::OPEN));
    // MISO stuck high reads all ones: every fault.
    assert_eq!(
        decode_frame(u32::MAX),
        Err(Max31855Fault {
            open: true,
            short_gnd: true,
            short_vcc: true
        })
    );
}

#[test]
fn fault_frames_round_trip() {
    for fault in [
        Max31855Fault::OPEN,
        Max31855Fault {
            short_vcc: true,
            ..Default::default()
        },
    ] {
        assert_eq!(decode_frame(encode_frame(0, 400, Some(fault))), Err(fault));
    }
}

/// An SPI device whose every transaction fails.
struct BrokenSpi;

impl ErrorType for BrokenSpi {
    type Error = ErrorKind;
}

impl SpiDevice for BrokenSpi {
    fn transaction(&mut self, _ops: &mut [Operation<'_, u8>]) -> Result<(), Self::Error> {
        Err(spi::ErrorKind::ChipSelectFault)
    }
}

#[test]
fn bus_errors_are_wrapped() {
    let mut dev = Max31855::new(BrokenSpi);
    assert_eq!(dev.read(), Err(Error::Bus(ErrorKind::ChipSelectFault)));
    assert!(matches!(dev.read_hot_junction_c(), Err(Error::Bus(_))));
}

#[test]
fn hot_junction_is_cold_junction_compensated_with_its_90() {
    // NIST ITS-90 type K: E(200 °C) = 8.138 mV, E(25 °C) = 1.000 mV. The
    // chip reports 25 + 7.138 / 0.041276 = 197.93 °C → 198.00 (0.25 °C).
    let tc_c = chip_thermocouple_c(200.0, 25.0).unwrap();
    assert!((tc_c - 197.93).abs() < 0.01, "{tc_c}");
    let r = Max31855Reading::from_counts(thermocouple_count(tc_c), internal_count(25.0)).unwrap();
    assert_eq!(r.thermocouple_c(), 198.0);
    let t = linearized_hot_junction_c(&r).unwrap();
    // 0.07 °C of rounding × (41.276 / 41.0 µV/°C near 200 °C).
    assert!((t - 200.0).abs() < 0.1, "{t}");

    let mut dev = Max31855::new(Mock::new(&read_transaction(encode_frame(
        r.thermocouple_count(),
        r.internal_count(),
        None,
    ))));
    assert_eq!(dev.read_hot_junction_c(), Ok(t));
    dev.release().done();
}

#[test]
fn uncompensated_reading_beyond_its_90_is_a_conversion_error() {
    // +2047.75 °C is beyond type K's 1372 °C.
    let r = Max31855Reading::from_counts(8191, 400).unwrap();
    assert!(linearized_hot_junction_c(&r).is_err());
}

proptest! {
    /// What the chip reports, converted back, is the junction temperature
    /// to within the two quantisations (0.125 °C and 0.031 °C, scaled by
    /// the ratio of the chip's slope to the true one).
    #[test]
    fn chip_round_trip(hot_c in -100.0f64..1300.0, cj_c in -20.0f64..80.0) {
        let tc_c = chip_thermocouple_c(hot_c, cj_c).unwrap();
        let r = Max31855Reading::from_counts(thermocouple_count(tc_c), internal_count(cj_c)).unwrap();
        let t = linearized_hot_junction_c(&r).unwrap();
        let s_hot = ThermocoupleType::K.seebeck_mv_per_c(hot_c).unwrap();
        let tol = (0.125 + 0.032) * 0.041276 / s_hot + 0.04;
        prop_assert!((t - hot_c).abs() < tol, "{hot_c} {cj_c} -> {t}");
    }
}
