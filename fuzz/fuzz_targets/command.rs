//! The controller's command receiver on arbitrary bytes in arbitrary
//! chunks: it must never panic, and nothing the fuzzer sends may change the
//! controller's state, since it cannot forge a tag under the key. Every
//! frame the receiver accepts as well formed must re-encode and decode to
//! the same command.
#![no_main]

use heatbound::alarm::RuleId;
use heatbound::config::RigConfig;
use heatbound::control::{Controller, ControllerSettings};
use heatbound::monitor::Sample;
use heatbound::wire::{self, Addressee, Command, CommandKey, Frame, ReplyCode, RigId};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Some((&seed, stream)) = data.split_first() else {
        return;
    };
    let settings = ControllerSettings {
        rig_id: RigId::new("fuzz-rig").unwrap_or_default(),
        firmware_version: (0, 1, 0),
        sample_period_ms: 1000,
        summary_period_ms: 1000,
        hello_period_ms: 0,
    };
    let Ok(mut c) =
        Controller::<64>::new(&settings, &RigConfig::default(), Some(&CommandKey::DEMO), 7)
    else {
        return;
    };
    // 60 % against a 50 % bound: beyond_carnot active, tripping.
    for i in 0..12u32 {
        let s = Sample {
            t_ms: i * 1000,
            t_hot_k: 600.0,
            t_cold_k: 300.0,
            heat_in_w: 500.0,
            work_w: 300.0,
            heat_out_w: None,
            t_hot2_k: None,
        };
        c.step(&s, &mut |_: &Frame| {});
    }
    let before = (
        RuleId::ALL.map(|r| c.alarms().state(r)),
        c.hello().config_digest,
        c.hello().run,
        c.hello().last_counter,
    );

    let mut rest = stream;
    let mut step = usize::from(seed % 37) + 1;
    while !rest.is_empty() {
        let (chunk, tail) = rest.split_at(step.min(rest.len()));
        c.receive(chunk, 12_000, &mut |f: &Frame| {
            if let Frame::Reply(r) = f {
                // Only a Hello request, which changes nothing, is applied.
                assert!(r.code != ReplyCode::Applied || r.counter == 0, "{r:?}");
            }
        });
        rest = tail;
        step = (step * 5 + 3) % 41 + 1;
    }
    // A window boundary: nothing may be waiting to be applied either.
    let s = Sample {
        t_ms: 13_000,
        t_hot_k: 600.0,
        t_cold_k: 300.0,
        heat_in_w: 500.0,
        work_w: 300.0,
        heat_out_w: None,
        t_hot2_k: None,
    };
    c.step(&s, &mut |_: &Frame| {});
    let after = (
        RuleId::ALL.map(|r| c.alarms().state(r)),
        c.hello().config_digest,
        c.hello().run,
        c.hello().last_counter,
    );
    assert_eq!(before, after);

    // Whatever decodes re-encodes to the same command.
    for piece in stream.split(|&b| b == 0) {
        let mut bytes = piece.to_vec();
        if let Ok(rx) = wire::decode_command(&mut bytes) {
            let frame = rx.frame;
            // A configuration the controller would refuse (NaN included,
            // which equals nothing) is not sent by an encoder at all.
            if let Command::Configure(config) = &frame.command
                && config.check().is_err()
            {
                continue;
            }
            let to = Addressee {
                rig_id: settings.rig_id,
                session: 7,
            };
            let mut buf = [0u8; wire::MAX_COMMAND_LEN];
            let n = wire::encode_command(&frame, None, &to, &mut buf)
                .expect("a decoded command re-encodes");
            let mut again = buf[..n - 1].to_vec();
            let back = wire::decode_command(&mut again).expect("and decodes");
            assert_eq!(back.frame, frame);
        }
    }
});
