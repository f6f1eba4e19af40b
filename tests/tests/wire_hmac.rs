//! The command tags' HMAC-SHA-256 against RFC 4231 (Identifiers and Test
//! Vectors for HMAC-SHA-224, -256, -384 and -512), test cases 1–7, §4.2–4.8;
//! each value was also recomputed with Python's `hmac` module. Then the
//! tag `Authenticator` seals with is shown to be the first 8 bytes of that
//! same HMAC over the documented prefix and the command (left truncation,
//! as RFC 4231 test case 5 truncates to 128 bits).
use heatbound::wire::{
    self, Addressee, Authenticator, Command, CommandFrame, CommandKey, MAC_LEN, RigId,
};

fn unhex(s: &str) -> Vec<u8> {
    (0..s.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&s[i..i + 2], 16).unwrap())
        .collect()
}

#[test]
fn rfc_4231_test_cases() {
    let long_key = [0xaau8; 131];
    let cases: [(&[u8], &[u8], &str); 7] = [
        // Test case 1 (§4.2).
        (
            &[0x0b; 20],
            b"Hi There",
            "b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7",
        ),
        // Test case 2 (§4.3): a key shorter than the output.
        (
            b"Jefe",
            b"what do ya want for nothing?",
            "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843",
        ),
        // Test case 3 (§4.4): combined key and data longer than 64 bytes.
        (
            &[0xaa; 20],
            &[0xdd; 50],
            "773ea91e36800e46854db8ebd09181a72959098b3ef8c122d9635514ced565fe",
        ),
        // Test case 4 (§4.5).
        (
            &[
                1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 20, 21, 22, 23,
                24, 25,
            ],
            &[0xcd; 50],
            "82558a389a443c0ea4cc819899f2083a85f0faa3e578f8077a2e3ff46729665b",
        ),
        // Test case 5 (§4.6): the output truncated to its first 128 bits.
        (
            &[0x0c; 20],
            b"Test With Truncation",
            "a3b6167473100ee06e0c796c2955552b",
        ),
        // Test case 6 (§4.7): a key longer than the block, hashed first.
        (
            &long_key,
            b"Test Using Larger Than Block-Size Key - Hash Key First",
            "60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54",
        ),
        // Test case 7 (§4.8): key and data longer than the block.
        (
            &long_key,
            b"This is a test using a larger than block-size key and a larger than block-size \
              data. The key needs to be hashed before being used by the HMAC algorithm.",
            "9b09ffa71b942fcb27635fbcd5b0e944bfdc63644f0713938a7f51535c3a35e2",
        ),
    ];
    for (i, (key, data, expected)) in cases.iter().enumerate() {
        let mac = wire::hmac_sha256(key, data);
        let expected = unhex(expected);
        assert_eq!(&mac[..expected.len()], &expected[..], "test case {}", i + 1);
    }
}

#[test]
fn a_command_tag_is_the_truncated_hmac_of_prefix_and_command() {
    let key = CommandKey::from_bytes(*b"0123456789abcdef0123456789abcdef");
    let to = Addressee {
        rig_id: RigId::new("stirling-2").unwrap(),
        session: 0xDEAD_BEEF,
    };
    let frame = CommandFrame {
        counter: 42,
        command: Command::Acknowledge(None),
    };
    let mut buf = [0u8; wire::MAX_COMMAND_LEN];
    let n = wire::encode_command(&frame, Some(&Authenticator::new(&key)), &to, &mut buf).unwrap();
    let mut body = buf[..n - 1].to_vec();
    let received = wire::decode_command(&mut body).unwrap();
    assert_eq!(received.frame, frame);
    // The payload as the specification lays it out: version 2, kind 16,
    // counter 42 (one varint byte), variant 1 (Acknowledge), None.
    let payload = [2u8, 16, 42, 1, 0];
    let mut message = wire::tag_prefix(&to).to_vec();
    message.extend_from_slice(&payload);
    let full = wire::hmac_sha256(b"0123456789abcdef0123456789abcdef", &message);
    assert_eq!(Authenticator::new(&key).tag(&to, &payload), full[..MAC_LEN]);
    assert!(received.authentic(&Authenticator::new(&key), &to));
}
