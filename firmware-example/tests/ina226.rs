//! INA226 driver: register conversions, the calibration equations of the
//! datasheet, and the I2C transactions of init and reads, over
//! embedded-hal-mock.
//!
//! Values from the INA226 datasheet (TI SBOS547): the calibration and
//! scaling equations of its "Programming" section (CAL = 0.00512 /
//! (current_LSB · R_shunt), current_LSB = max current / 2^15, power LSB =
//! 25 · current_LSB) and the register descriptions, and the worked numbers
//! of its "Configure/Measure/Calculate Example", Table 1: a 10 A load
//! through 2 mΩ at 12 V common mode, 15 A expected at most (current LSB
//! 457.7 µA/bit, rounded to 1 mA/bit), so CAL = 2560 (A00h), shunt 1F40h
//! (8000, 20 mV), bus 2570h (9584, 11.98 V), current 2710h (10000, 10 A),
//! power 12B8h (4792; the table prints 119.82 W, the product is 119.80 W).

use embedded_hal::i2c::ErrorKind;
use embedded_hal_mock::eh1::i2c::{Mock, Transaction as T};
use heatbound_firmware_example::drivers::ina226::conversion::{
    Averaging, CAL_MAX, Calibration, CalibrationError, Config, ConversionTime, OperatingMode,
    bus_register, bus_voltage_v, current_a, current_register, power_register, power_w,
    shunt_register, shunt_voltage_v,
};
use heatbound_firmware_example::drivers::ina226::{Error, Ina226};

const ADDR: u8 = 0x40;

fn init_transactions(addr: u8, config: u16, cal: u16) -> Vec<T> {
    let [ch, cl] = config.to_be_bytes();
    let [kh, kl] = cal.to_be_bytes();
    vec![
        T::write_read(addr, vec![0xFE], vec![0x54, 0x49]),
        T::write_read(addr, vec![0xFF], vec![0x22, 0x60]),
        T::write(addr, vec![0x00, ch, cl]),
        T::write(addr, vec![0x05, kh, kl]),
    ]
}

#[test]
fn calibration_equations() {
    // SBOS547's example: 15 A at most gives a current LSB of 457.7 µA/bit
    // (15 A / 2^15 = 457.76 µA, printed to four digits).
    let c = Calibration::for_max_current(15.0, 0.002).unwrap();
    assert!((c.current_lsb_a() - 457.7e-6).abs() < 0.1e-6);
    // Equations 1 and 2: current_LSB = 10 A / 2^15 = 305.18 µA;
    // CAL = 0.00512 / (305.18 µA · 2 mΩ) = 8388.6 → 8388.
    let c = Calibration::for_max_current(10.0, 0.002).unwrap();
    assert!((c.current_lsb_a() - 305.176e-6).abs() < 1e-9);
    assert_eq!(c.cal(), 8388);
    // Rounded up to a 1 mA LSB for readable registers: CAL = 2560 (0x0A00),
    // power LSB 25 mW.
    let c = Calibration::for_current_lsb(0.001, 0.002).unwrap();
    assert_eq!(c.cal(), 0x0A00);
    assert!((c.power_lsb_w() - 0.025).abs() < 1e-9);
    // The bench calibration: 0.5 mA through 2 mΩ.
    assert_eq!(
        Calibration::for_current_lsb(0.0005, 0.002).unwrap().cal(),
        5120
    );
    // Out of range either way, and nonsense inputs.
    assert!(matches!(
        Calibration::for_current_lsb(1e-7, 0.002),
        Err(CalibrationError::OutOfRange { .. })
    ));
    assert!(matches!(
        Calibration::for_current_lsb(10.0, 1.0),
        Err(CalibrationError::OutOfRange { .. })
    ));
    assert_eq!(
        Calibration::for_max_current(f32::NAN, 0.002),
        Err(CalibrationError::NotPositive)
    );
    assert_eq!(
        Calibration::for_max_current(10.0, 0.0),
        Err(CalibrationError::NotPositive)
    );
    assert!(Calibration::for_current_lsb(0.00512 / f32::from(CAL_MAX), 1.0).is_ok());
}

#[test]
fn register_conversions() {
    let cal = Calibration::for_current_lsb(0.001, 0.002).unwrap();
    // 20 mV across 2 mΩ is 10 A: shunt 8000 LSB = 0x1F40, current 0x2710.
    assert!((shunt_voltage_v(0x1F40) - 0.020).abs() < 1e-9);
    assert_eq!(current_register(0x1F40, cal.cal()), 10_000);
    assert_eq!(current_a(10_000, &cal), 10.0);
    // SBOS547 Table 1: bus 2570h = 9584 · 1.25 mV = 11.98 V (12 V less the
    // 20 mV shunt drop); power = 10000 · 9584 / 20000 = 4792 = 12B8h. The
    // table prints 119.82 W; 4792 · 25 mW/bit is 119.80 W, which is also
    // 11.98 V · 10 A.
    assert!((bus_voltage_v(0x2570) - 11.98).abs() < 1e-6);
    assert_eq!(power_register(0x2710, 0x2570), 0x12B8);
    assert!((power_w(0x12B8, &cal) - 119.80).abs() < 1e-3);
    // Exactly 12 V is 9600 LSB; 10 A there is 4800, 120 W (Equation 4).
    assert_eq!(bus_voltage_v(0x2580), 12.0);
    assert_eq!(power_register(10_000, 0x2580), 4800);
    assert!((power_w(4800, &cal) - 120.0).abs() < 1e-3);
    // Negative shunt voltage and current: two's complement.
    assert!((shunt_voltage_v(0xE0C0) + 0.020).abs() < 1e-9);
    assert_eq!(current_register(0xE0C0, cal.cal()) as i16, -10_000);
    assert_eq!(current_a(0xD8F0, &cal), -10.0);
    // Full scale and saturation in the inverse direction.
    assert!((shunt_voltage_v(0x7FFF) - 0.081_917_5).abs() < 1e-7);
    assert_eq!(shunt_register(1.0), 0x7FFF);
    assert_eq!(shunt_register(-1.0) as i16, i16::MIN);
    assert_eq!(bus_register(100.0), 0x7FFF);
    assert_eq!(bus_register(-1.0), 0);
    assert_eq!(bus_register(f32::NAN), 0);
    // Bit 15 of the bus register is always 0; ignored if set.
    assert_eq!(bus_voltage_v(0x8000 | 0x2580), 12.0);
}

#[test]
fn config_register_bits() {
    assert_eq!(Config::default().bits(), 0x4127);
    let c = Config {
        averaging: Averaging::X1024,
        bus_conversion: ConversionTime::Us8244,
        shunt_conversion: ConversionTime::Us140,
        mode: OperatingMode::ShuntAndBusTriggered,
    };
    assert_eq!(c.bits(), 0x4000 | 7 << 9 | 7 << 6 | 3);
}

#[test]
fn init_checks_ids_and_programs_config_and_calibration() {
    let cal = Calibration::for_current_lsb(0.001, 0.002).unwrap();
    let config = Config {
        averaging: Averaging::X16,
        ..Config::default()
    };
    let ina = Ina226::new(ADDR, config, cal);
    let mut i2c = Mock::new(&init_transactions(ADDR, 0x4527, 0x0A00));
    assert_eq!(ina.init(&mut i2c), Ok(()));
    i2c.done();
}

#[test]
fn wrong_device_is_rejected_before_any_write() {
    let ina = Ina226::new(
        ADDR,
        Config::default(),
        Calibration::for_max_current(10.0, 0.002).unwrap(),
    );
    // An INA219 has no id registers; say it answers 0x0000 / 0x0000.
    let mut i2c = Mock::new(&[
        T::write_read(ADDR, vec![0xFE], vec![0x00, 0x00]),
        T::write_read(ADDR, vec![0xFF], vec![0x00, 0x00]),
    ]);
    assert_eq!(
        ina.init(&mut i2c),
        Err(Error::WrongDevice {
            manufacturer_id: 0,
            die_id: 0
        })
    );
    i2c.done();
}

#[test]
fn reads_voltage_current_shunt_and_power() {
    let cal = Calibration::for_current_lsb(0.001, 0.002).unwrap();
    let ina = Ina226::new(ADDR, Config::default(), cal);
    let mut i2c = Mock::new(&[
        T::write_read(ADDR, vec![0x02], vec![0x25, 0x80]),
        T::write_read(ADDR, vec![0x04], vec![0x27, 0x10]),
        T::write_read(ADDR, vec![0x01], vec![0x1F, 0x40]),
        T::write_read(ADDR, vec![0x03], vec![0x12, 0xC0]),
    ]);
    let r = ina.read(&mut i2c).unwrap();
    assert_eq!((r.voltage_v, r.current_a), (12.0, 10.0));
    assert!((ina.read_shunt_voltage_v(&mut i2c).unwrap() - 0.020).abs() < 1e-9);
    assert!((ina.read_power_w(&mut i2c).unwrap() - 120.0).abs() < 1e-3);
    i2c.done();
}

#[test]
fn divider_scales_the_bus_voltage() {
    let cal = Calibration::for_current_lsb(0.0005, 0.002).unwrap();
    let ina = Ina226::new(0x41, Config::default(), cal).with_bus_divider(2.0);
    // 24 V at the pin (19200 LSB) through 2:1 is 48 V.
    let mut i2c = Mock::new(&[T::write_read(0x41, vec![0x02], vec![0x4B, 0x00])]);
    assert_eq!(ina.read_voltage_v(&mut i2c), Ok(48.0));
    i2c.done();
    // Ratios below 1 or not finite are ignored.
    assert_eq!(
        Ina226::new(0x41, Config::default(), cal)
            .with_bus_divider(0.5)
            .bus_divider(),
        1.0
    );
}

#[test]
fn bus_errors_are_wrapped() {
    let ina = Ina226::new(
        ADDR,
        Config::default(),
        Calibration::for_max_current(10.0, 0.002).unwrap(),
    );
    let mut i2c = Mock::new(&[
        T::write_read(ADDR, vec![0xFE], vec![0x54, 0x49]).with_error(ErrorKind::Bus),
        T::write_read(ADDR, vec![0x02], vec![0, 0]).with_error(ErrorKind::ArbitrationLoss),
    ]);
    assert_eq!(ina.init(&mut i2c), Err(Error::Bus(ErrorKind::Bus)));
    assert_eq!(
        ina.read(&mut i2c),
        Err(Error::Bus(ErrorKind::ArbitrationLoss))
    );
    i2c.done();
}
