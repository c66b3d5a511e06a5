//! The wire format: golden bytes, framing against published examples, and
//! the streaming decoder against arbitrary input.

mod common;

use common::*;
use gleaner_protocol::*;
use proptest::prelude::*;

fn frame_of<T: serde::Serialize>(message: &T) -> Vec<u8> {
    let mut buf = [0u8; 512];
    encode_frame(message, &mut buf).unwrap().to_vec()
}

fn decode_all(bytes: &[u8]) -> (Vec<Result<Uplink, FrameError>>, DecoderStats) {
    let mut decoder = Decoder::<Uplink, MAX_UPLINK_FRAME_LEN>::new();
    let mut out = Vec::new();
    decoder.feed(bytes, |r| out.push(r));
    (out, *decoder.stats())
}

// Protocol 2's `Hello` (the only kind whose layout protocols 3 and 4
// changed), as protocol 2 had it: still read, through `decode_uplink_any`.
// Protocol 3's golden bytes of the example Hello (as protocol 3 had them,
// before the shed load): still read, through `decode_uplink_any`.
const GOLDEN_V3_HELLO: &str = "01020c020301020117ef9bafcdf8acd1910181dcff870c904e0c80c0ea92030c8080d2f83e178080d5a506508080d5a5060680ea30e0dc2ad0860380897a80d461c801904ee0d403d00fc0ee6d80897ac0ee6de807a08d06b0ea010c677265656e686f7573652d33e0cd2f0101959aef3af8948c2fa31354b7b12c00";

const GOLDEN_V2_HELLO: &str = "01020c020201020117ef9bafcdf8acd1910181dcff870c904e0c80c0ea92030c8080d2f83e178080d5a5064c8080d5a5060680ea30e0dc2ad0860380897a80d461c801904ee0d403d00fc0ee6d80897ac0ee6de807a08d06b0ea010c677265656e686f7573652d3301959aef3af8948c2fa313f51ce0c600";

// Protocol 1's golden bytes of the same messages (as protocol 1 had them):
// still read, through `decode_uplink_any`.
const GOLDEN_V1: [(&str, &str); 5] = [
    ("hello", "01020c02010102010e81dcff870c904e0c80c0ea92030c8080d2f83e178080d5a506368080d5a5060680ea30e0dc2ad0860380897a80d461c801904ee0d403d00fe807a08d06b0ea0101959aef3af8948c2fa3135d55ec7100"),
    ("report", "34e12180dddb0101e80764809f49a09c019875c0843dd08603c0b802a0b5c901904ee80790a10fd0e20ef0f0e401809f49a8ad3202020103e8070101010601c0cbc90201054ec8586c00"),
    ("event", "16e221fadedb0102020404d08e2ae09abd011b3bf67900"),
    ("samples", "050788270372e007e80708809f49c0843da0b5c90190a10fa0a549c0843da0b5c90190a10fc0ab49c0843da0b5c90190a10fe0b149c0843da0b5c90190a10f80b849c0843da0b5c90190a10fa0be49c0843da0b5c90190a10fc0c449c0843da0b5c90190a10fe0ca49c0843da0b5c90190a10fc57926e800"),
    ("reply", "0709ec27044d0205065985df00"),
];

/// The pinned frames, one line per message kind: direction, kind, hex.
const GOLDEN_FILE: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/data/golden-frames.txt");

/// Every example message of both directions, framed, as the golden file lists them.
fn example_frames() -> String {
    let uplinks = [
        example_hello(),
        example_report(),
        example_event(),
        example_samples(8),
        example_reply(),
        example_load_event(),
        example_harvest(),
    ];
    assert_eq!(uplinks.len(), UplinkBody::KIND_NAMES.len());
    let commands = [
        (6, Command::Ping),
        (7, Command::GetInfo),
        (5, Command::SetConfig(example_config())),
        (8, Command::ResetEnergy),
        (9, Command::StartBurst { samples: 2_000 }),
    ];
    assert_eq!(commands.len(), Command::KIND_NAMES.len());
    let mut text = String::new();
    for message in &uplinks {
        let name = message.body.kind_name();
        text += &format!("uplink {name} {}\n", hex(&frame_of(message)));
    }
    for ((request_id, command), name) in commands.into_iter().zip(Command::KIND_NAMES) {
        let frame = frame_of(&Downlink {
            request_id,
            command,
        });
        text += &format!("downlink {name} {}\n", hex(&frame));
    }
    text
}

// Golden bytes: an accidental change of the wire format fails here. After a
// deliberate protocol version bump, `GLEANER_BLESS=1 cargo test -p
// gleaner-protocol --test wire` rewrites the file; review its diff.
#[test]
fn golden_bytes_of_every_message_kind() {
    let now = example_frames();
    if std::env::var_os("GLEANER_BLESS").is_some_and(|v| v == "1") {
        std::fs::write(GOLDEN_FILE, &now).unwrap();
        return;
    }
    let pinned = std::fs::read_to_string(GOLDEN_FILE).unwrap();
    let wrong: Vec<&str> = now
        .lines()
        .zip(pinned.lines().chain(std::iter::repeat("")))
        .filter(|(a, b)| a != b)
        .map(|(a, _)| a)
        .collect();
    assert!(
        wrong.is_empty() && now.lines().count() == pinned.lines().count(),
        "golden bytes differ (GLEANER_BLESS=1 after a deliberate protocol bump); now:\n{}",
        wrong.join("\n")
    );
}

#[test]
fn protocol_1_frames_are_still_read() {
    let mut decoded = Vec::new();
    for (name, golden) in GOLDEN_V1 {
        let mut bytes: Vec<u8> = (0..golden.len() - 2)
            .step_by(2)
            .map(|i| u8::from_str_radix(&golden[i..i + 2], 16).unwrap())
            .collect();
        // A log knows its boot's protocol from the boot's Hello.
        let (message, major) = decode_uplink_any(&mut bytes, Some(1)).unwrap();
        assert_eq!((major, message.body.kind_name()), (1, name));
        decoded.push(message);
    }
    let UplinkBody::Hello(hello) = &decoded[0].body else {
        panic!("a hello")
    };
    assert_eq!((hello.node_id, hello.boot_id), (0, 0xC0FF_EE01));
    assert_eq!(hello.protocol.major, 1);
    // Protocol 1 counted its storage forecast down to output_down: that stands
    // in for the load's minimum.
    assert_eq!(hello.config.thresholds.load_min_uv, 1_600_000);
    let UplinkBody::Report(report) = &decoded[1].body else {
        panic!("a report")
    };
    assert_eq!(report.brownout_in_ms, Some(5_400_000));
    // 825,000 nJ over 1 s: 825 µW.
    assert_eq!(report.load_nw, 825_000);
    let UplinkBody::Event(event) = &decoded[2].body else {
        panic!("an event")
    };
    assert_eq!((event.trigger_input_uv, event.input_uv), (690_000, 690_000));
    assert_eq!(decoded[3], example_samples(8));
    assert_eq!(decoded[4], example_reply());
    // A current frame is read as the current protocol.
    let mut frame = frame_of(&example_hello());
    frame.pop();
    let (message, major) = decode_uplink_any(&mut frame, None).unwrap();
    assert_eq!((major, message), (PROTOCOL_VERSION.major, example_hello()));
}

fn unhex(text: &str) -> Vec<u8> {
    (0..text.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&text[i..i + 2], 16).unwrap())
        .collect()
}

/// The Hello of an older `major` from its golden hex, read through
/// `decode_uplink_any` with and without the boot's version at hand.
fn older_hello(golden: &str, major: u8) -> Hello {
    let mut bytes = unhex(golden);
    bytes.pop(); // the frame's trailing delimiter
    let (message, read_as) = decode_uplink_any(&mut bytes, Some(major)).unwrap();
    assert_eq!(read_as, major);
    let UplinkBody::Hello(hello) = message.body else {
        panic!("a hello")
    };
    assert_eq!(hello.protocol.major, major);
    // Without the boot's version at hand, the Hello says it itself.
    let mut bytes = unhex(golden);
    bytes.pop();
    assert_eq!(decode_uplink_any(&mut bytes, None).unwrap().1, major);
    // The other kinds kept their layout: today's bytes read as the older major's.
    let mut report = frame_of(&example_report());
    report.pop();
    let (message, read_as) = decode_uplink_any(&mut report, Some(major)).unwrap();
    assert_eq!((read_as, message), (major, example_report()));
    hello
}

#[test]
fn protocol_2_frames_are_still_read() {
    let hello = older_hello(GOLDEN_V2_HELLO, 2);
    // Protocol 2 nodes were not told their converter, nor their shed load.
    assert_eq!(hello.config.converter, ConverterModel::UNKNOWN);
    assert_eq!(hello.config.shed_load_na, 0);
    let UplinkBody::Hello(current) = example_hello().body else {
        panic!("a hello")
    };
    assert_eq!(hello.config.thresholds, current.config.thresholds);
    assert_eq!(hello.config.name, current.config.name);
}

#[test]
fn protocol_3_frames_are_still_read() {
    let hello = older_hello(GOLDEN_V3_HELLO, 3);
    // Protocol 3 nodes were told their converter but not their shed load.
    let UplinkBody::Hello(current) = example_hello().body else {
        panic!("a hello")
    };
    assert_eq!(hello.config.converter, current.config.converter);
    assert_eq!(hello.config.thresholds, current.config.thresholds);
    assert_eq!(hello.config.shed_load_na, 0);
    assert_ne!(current.config.shed_load_na, 0);
}

#[test]
fn crc_check_value_from_the_catalogue() {
    // Catalogue of parametrised CRC algorithms (reveng): CRC-32/ISO-HDLC,
    // check = 0xCBF43926 for the ASCII string "123456789".
    assert_eq!(frame_crc(b"123456789"), 0xCBF4_3926);
    // Same source's second example, also Python zlib.crc32:
    assert_eq!(
        frame_crc(b"The quick brown fox jumps over the lazy dog"),
        0x414F_A339
    );
}

/// Bytes serialised as a tuple: exactly the bytes, no length prefix.
struct RawBytes<'a>(&'a [u8]);

impl serde::Serialize for RawBytes<'_> {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeTuple;
        let mut t = s.serialize_tuple(self.0.len())?;
        for b in self.0 {
            t.serialize_element(b)?;
        }
        t.end()
    }
}

/// Our framing uses postcard's COBS flavour to encode and the `cobs` crate to
/// decode; both must follow Cheshire and Baker, "Consistent Overhead Byte
/// Stuffing", IEEE/ACM Transactions on Networking 7(2), 1999.
#[test]
fn cobs_examples_from_the_paper() {
    let cases: [(Vec<u8>, Vec<u8>); 6] = [
        (vec![0x00], vec![0x01, 0x01, 0x00]),
        (vec![0x00, 0x00], vec![0x01, 0x01, 0x01, 0x00]),
        (vec![0x00, 0x11, 0x00], vec![0x01, 0x02, 0x11, 0x01, 0x00]),
        (
            vec![0x11, 0x22, 0x00, 0x33],
            vec![0x03, 0x11, 0x22, 0x02, 0x33, 0x00],
        ),
        (
            vec![0x11, 0x22, 0x33, 0x44],
            vec![0x05, 0x11, 0x22, 0x33, 0x44, 0x00],
        ),
        (
            vec![0x11, 0x00, 0x00, 0x00],
            vec![0x02, 0x11, 0x01, 0x01, 0x01, 0x00],
        ),
    ];
    for (raw, encoded) in cases {
        let mut buf = [0u8; 600];
        // postcard serialises a tuple of bytes as the bytes themselves.
        let got = postcard::to_slice_cobs(&RawBytes(&raw), &mut buf)
            .unwrap()
            .to_vec();
        assert_eq!(got, encoded, "encoding {raw:02x?}");
        let mut body = encoded[..encoded.len() - 1].to_vec();
        let n = cobs::decode_in_place(&mut body).unwrap();
        assert_eq!(&body[..n], &raw[..], "decoding {encoded:02x?}");
    }
    // Runs of 254 non-zero bytes: the paper's minimal encodings. The cobs crate
    // encodes and decodes them so. (postcard's flavour adds a harmless empty
    // block, `01`, after a full run; our frames are at most
    // MAX_UPLINK_FRAME_LEN = 196 bytes, so they never hold such a run.)
    let run: Vec<u8> = (1..=0xFEu8).collect();
    let mut buf = [0u8; 600];
    let n = cobs::try_encode(&run, &mut buf).unwrap();
    assert_eq!(&buf[..n], &[vec![0xFF], run.clone()].concat()[..]);
    let zero_then_run: Vec<u8> = (0..=0xFEu8).collect();
    let n = cobs::try_encode(&zero_then_run, &mut buf).unwrap();
    assert_eq!(&buf[..n], &[vec![0x01, 0xFF], run.clone()].concat()[..]);
    let run_ff: Vec<u8> = (1..=0xFFu8).collect();
    let n = cobs::try_encode(&run_ff, &mut buf).unwrap();
    assert_eq!(
        &buf[..n],
        &[vec![0xFF], run.clone(), vec![0x02, 0xFF]].concat()[..]
    );
    let mut decoded = buf[..n].to_vec();
    let m = cobs::decode_in_place(&mut decoded).unwrap();
    assert_eq!(&decoded[..m], &run_ff[..]);
    const { assert!(MAX_UPLINK_FRAME_LEN < 254) };
    // Must reject (common practice): a truncated block.
    let mut truncated = [0x05, 0x11, 0x22];
    assert!(cobs::decode_in_place(&mut truncated).is_err());
}

#[test]
fn cobs_overhead_matches_the_paper() {
    // n + max(1, ceil(n / 254)) without the delimiter.
    for (n, expected) in [(0usize, 1usize), (254, 255), (255, 257), (1000, 1004)] {
        assert_eq!(cobs::max_encoding_length(n), expected, "n = {n}");
    }
}

#[test]
fn postcard_varints_follow_the_spec() {
    // postcard wire-format specification: LEB128 varints, zigzag for signed.
    let mut buf = [0u8; 16];
    for (v, expected) in [
        (0u16, &[0x00][..]),
        (127, &[0x7F]),
        (128, &[0x80, 0x01]),
        (16_384, &[0x80, 0x80, 0x01]),
        (65_535, &[0xFF, 0xFF, 0x03]),
    ] {
        assert_eq!(
            postcard::to_slice(&v, &mut buf).unwrap(),
            expected,
            "u16 {v}"
        );
    }
    assert_eq!(
        postcard::to_slice(&u32::MAX, &mut buf).unwrap(),
        &[0xFF, 0xFF, 0xFF, 0xFF, 0x0F]
    );
    for (v, expected) in [
        (-1i16, &[0x01][..]),
        (1, &[0x02]),
        (-64, &[0x7F]),
        (64, &[0x80, 0x01]),
        (32_767, &[0xFE, 0xFF, 0x03]),
        (-32_768, &[0xFF, 0xFF, 0x03]),
    ] {
        assert_eq!(
            postcard::to_slice(&v, &mut buf).unwrap(),
            expected,
            "i16 {v}"
        );
    }
    // Must reject (spec, canonical encodings).
    assert!(postcard::from_bytes::<u16>(&[0x80, 0x80, 0x80, 0x00]).is_err());
    assert!(postcard::from_bytes::<u16>(&[0xFF, 0xFF, 0x07]).is_err());
    assert!(postcard::from_bytes::<bool>(&[0x02]).is_err());
}

#[test]
fn max_frame_length_is_derived_and_enough() {
    assert_eq!(
        MAX_UPLINK_FRAME_LEN,
        max_frame_len(Uplink::POSTCARD_MAX_SIZE)
    );
    // The largest possible message fits; a too-small buffer is an error.
    let hello = example_hello();
    let frame = frame_of(&hello);
    assert!(frame.len() <= MAX_UPLINK_FRAME_LEN);
    let mut small = [0u8; 20];
    assert_eq!(
        encode_frame(&hello, &mut small),
        Err(EncodeError::BufferTooSmall)
    );
}

#[test]
fn wire_sizes_of_typical_messages() {
    // Figures for the issue notes; the bounds keep them from creeping.
    let report = frame_of(&example_report()).len();
    let samples = frame_of(&example_samples(8)).len();
    let hello = frame_of(&example_hello()).len();
    assert_eq!((report, samples, hello), (81, 120, 127));
    assert!(
        samples as f64 / 8.0 <= 16.0,
        "a four-channel sample costs at most 16 bytes on the wire"
    );
}

#[test]
fn a_valid_frame_after_garbage_is_recovered() {
    // Line noise: the decoder is in step again at the next delimiter.
    let mut stream = vec![0x13, 0x37, 0xFF, 0x00, 0x42, 0x42, 0x00];
    stream.extend(frame_of(&example_event()));
    let (results, stats) = decode_all(&stream);
    assert_eq!(results.last(), Some(&Ok(example_event())));
    assert_eq!(stats.frames, 1);
    assert_eq!(stats.errors(), 2);
    // Noise with no delimiter after it joins the next frame, which is lost
    // (caught by COBS or the CRC); the frame after that decodes.
    let mut stream = vec![0x42, 0x42];
    stream.extend(frame_of(&example_event()));
    stream.extend(frame_of(&example_reply()));
    let (results, _) = decode_all(&stream);
    assert!(results[0].is_err());
    assert_eq!(results[1], Ok(example_reply()));
}

#[test]
fn a_flipped_bit_is_caught_by_the_crc() {
    let mut frame = frame_of(&example_report());
    frame[20] ^= 0x04;
    let (results, stats) = decode_all(&frame);
    assert_eq!(results, vec![Err(FrameError::Crc)]);
    assert_eq!(stats.crc_errors, 1);
}

#[test]
fn oversize_frames_are_dropped_and_the_decoder_recovers() {
    let mut stream = vec![0x55; 3 * MAX_UPLINK_FRAME_LEN];
    stream.push(0);
    stream.extend(frame_of(&example_reply()));
    let (results, stats) = decode_all(&stream);
    assert_eq!(
        results,
        vec![Err(FrameError::Oversize), Ok(example_reply())]
    );
    assert_eq!(stats.oversize, 1);
}

#[test]
fn unknown_variants_are_named_as_such() {
    // A frame with a valid CRC whose message kind is beyond our enum.
    let body = [0x01u8, 0x02, 0x09];
    let crc = frame_crc(&body).to_le_bytes();
    let mut raw = body.to_vec();
    raw.extend_from_slice(&crc);
    let mut buf = [0u8; 32];
    let n = cobs::try_encode(&raw, &mut buf).unwrap();
    let mut stream = buf[..n].to_vec();
    stream.push(0);
    let (results, _) = decode_all(&stream);
    assert_eq!(results, vec![Err(FrameError::UnknownVariant)]);
}

#[test]
fn version_rule() {
    assert!(ProtocolVersion::check_compatible(ProtocolVersion { major: 4, minor: 9 }).is_ok());
    let err =
        ProtocolVersion::check_compatible(ProtocolVersion { major: 3, minor: 0 }).unwrap_err();
    let text = err.to_string();
    assert!(text.contains("4.0") && text.contains("3.0"), "{text}");
}

fn any_stats() -> impl Strategy<Value = ChannelStats> {
    (any::<u32>(), any::<u32>(), any::<u32>()).prop_map(|(mean, below_mean, above_mean)| {
        ChannelStats {
            mean,
            below_mean,
            above_mean,
        }
    })
}

fn any_state() -> impl Strategy<Value = ConverterState> {
    (0usize..6).prop_map(|i| ConverterState::ALL[i])
}

fn any_uplink() -> impl Strategy<Value = Uplink> {
    let report = (
        (
            any::<u32>(),
            any::<u32>(),
            any_stats(),
            any_stats(),
            any_stats(),
            any_stats(),
        ),
        (
            any::<u64>(),
            any::<u64>(),
            any::<i64>(),
            any_state(),
            any::<[u32; 6]>(),
        ),
        (
            proptest::option::of(any::<u32>()),
            proptest::option::of(any::<u32>()),
            any::<bool>(),
            any::<u8>(),
        ),
    )
        .prop_map(
            |(
                (interval_ms, sample_count, a, b, c, d),
                (drawn_nj, delivered_nj, stored_nj, state, ms),
                (f1, f2, shed, flags),
            )| {
                UplinkBody::Report(Report {
                    interval_ms,
                    sample_count,
                    input_uv: a,
                    input_na: b,
                    output_uv: c,
                    output_na: d,
                    drawn_nj,
                    delivered_nj,
                    stored_nj,
                    state,
                    state_ms: StateDurations {
                        idle_ms: ms[0],
                        cold_start_ms: ms[1],
                        harvesting_ms: ms[2],
                        sagging_ms: ms[3],
                        cutoff_ms: ms[4],
                        stalled_ms: ms[5],
                    },
                    input_cutoff_in_ms: f1,
                    brownout_in_ms: f2,
                    load_nw: u64::from(f1.unwrap_or(7)),
                    net_nw: -i64::from(f2.unwrap_or(3)),
                    load_powered: !shed,
                    load_shed: shed,
                    flags: ReportFlags(flags),
                })
            },
        );
    let event = (
        any_state(),
        any_state(),
        0usize..10,
        any::<u32>(),
        any::<u32>(),
    )
        .prop_map(|(from, to, c, input_uv, output_uv)| {
            let causes = [
                TransitionCause::InputAboveStart,
                TransitionCause::OutputUp,
                TransitionCause::InputNearHold,
                TransitionCause::ForecastUnderHorizon,
                TransitionCause::InputBelowHold,
                TransitionCause::OutputCollapsed,
                TransitionCause::ColdStartTimeout,
                TransitionCause::Recovered,
                TransitionCause::ConverterIdle,
                TransitionCause::ConverterStarted,
            ];
            UplinkBody::Event(Event {
                from,
                to,
                cause: causes[c],
                trigger_input_uv: output_uv,
                trigger_output_uv: input_uv,
                input_uv,
                output_uv,
            })
        });
    let samples = (
        any::<u32>(),
        any::<u32>(),
        any::<u32>(),
        proptest::collection::vec(any::<[u32; 4]>(), 0..=SAMPLES_PER_BLOCK),
    )
        .prop_map(|(first_index, remaining, period_us, v)| {
            let mut samples = heapless::Vec::new();
            for s in v {
                let _ = samples.push(Sample {
                    input_uv: s[0],
                    input_na: s[1],
                    output_uv: s[2],
                    output_na: s[3],
                });
            }
            UplinkBody::Samples(SampleBlock {
                first_index,
                remaining,
                period_us,
                samples,
            })
        });
    let hello = (any::<u32>(), any::<u32>()).prop_map(|(boot_id, period)| {
        let mut h = example_hello();
        if let UplinkBody::Hello(hello) = &mut h.body {
            hello.boot_id = boot_id;
            hello.sample_period_us = period;
        }
        h.body
    });
    let reply = (any::<u16>(), 0usize..3).prop_map(|(request_id, o)| {
        let outcome = [
            Outcome::Pong,
            Outcome::Accepted,
            Outcome::Refused(Refusal::BurstInProgress),
        ][o];
        UplinkBody::Reply(Reply {
            request_id,
            outcome,
        })
    });
    (
        any::<u16>(),
        any::<u64>(),
        prop_oneof![report, event, samples, hello, reply],
    )
        .prop_map(|(seq, uptime_ms, body)| Uplink {
            seq,
            uptime_ms,
            body,
        })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(500))]

    #[test]
    fn every_message_round_trips_whatever_the_split(messages in proptest::collection::vec(any_uplink(), 1..8), cuts in proptest::collection::vec(any::<usize>(), 0..12)) {
        let stream: Vec<u8> = messages.iter().flat_map(frame_of).collect();
        prop_assert!(messages.iter().all(|m| frame_of(m).len() <= MAX_UPLINK_FRAME_LEN));
        let mut points: Vec<usize> = cuts.iter().map(|c| c % (stream.len() + 1)).collect();
        points.push(0);
        points.push(stream.len());
        points.sort_unstable();
        let mut decoder = Decoder::<Uplink, MAX_UPLINK_FRAME_LEN>::new();
        let mut got = Vec::new();
        for w in points.windows(2) {
            decoder.feed(&stream[w[0]..w[1]], |r| got.push(r));
        }
        let expected: Vec<Result<Uplink, FrameError>> = messages.into_iter().map(Ok).collect();
        prop_assert_eq!(got, expected);
    }

    #[test]
    fn arbitrary_bytes_never_panic_and_never_yield_a_bad_crc(bytes in proptest::collection::vec(any::<u8>(), 0..2048)) {
        let mut decoder = Decoder::<Uplink, MAX_UPLINK_FRAME_LEN>::new();
        let mut splitter = FrameSplitter::<MAX_UPLINK_FRAME_LEN>::new();
        let mut accepted = 0u64;
        for &b in &bytes {
            // Every message the decoder yields must come from a frame whose CRC matched.
            let raw = splitter.push(b).and_then(|r| r.ok()).map(|f| f.to_vec());
            if let Some(Ok(_)) = decoder.push_byte(b) {
                let mut raw = raw.expect("a message comes from a frame");
                let n = cobs::decode_in_place(&mut raw).unwrap();
                let (body, crc) = raw[..n].split_at(n - 4);
                prop_assert_eq!(u32::from_le_bytes(crc.try_into().unwrap()), frame_crc(body));
                accepted += 1;
            }
        }
        prop_assert_eq!(decoder.stats().frames, accepted);
        prop_assert_eq!(decoder.stats().bytes, bytes.len() as u64);
    }

    #[test]
    fn a_valid_frame_survives_any_garbage_before_it(garbage in proptest::collection::vec(any::<u8>(), 0..600)) {
        let mut stream = garbage;
        stream.push(0);
        stream.extend(frame_of(&example_report()));
        let (results, _) = decode_all(&stream);
        prop_assert_eq!(results.last(), Some(&Ok(example_report())));
    }

    #[test]
    fn downlinks_round_trip(request_id in any::<u16>(), samples in any::<u32>()) {
        let d = Downlink { request_id, command: Command::StartBurst { samples } };
        let mut frame = frame_of(&d);
        frame.pop();
        prop_assert_eq!(decode_frame::<Downlink>(&mut frame), Ok(d));
    }
}

#[test]
fn a_refusal_of_the_mppt_fraction_names_the_accepted_range() {
    // The range comes from the constants the node checks against.
    assert_eq!(
        Refusal::MpptFractionOutOfRange.to_string(),
        "the converter's MPPT fraction must be 0 (none) or 5 % to 99 % of open circuit"
    );
    assert_eq!(
        Refusal::ShedLoadOutOfRange.to_string(),
        "the shed load's current must be at most 1000 mA"
    );
}

#[test]
fn every_refusal_with_a_limit_states_the_limit_the_node_checks() {
    use gleaner_protocol::limits::*;
    // Each text, and the number in it, from the constant (not restated here).
    let cases = [
        (Refusal::AdcBitsOutOfRange, MAX_ADC_BITS.to_string()),
        (Refusal::AdcBitsOutOfRange, MIN_ADC_BITS.to_string()),
        (
            Refusal::ReportIntervalOutOfRange,
            format!("{MIN_REPORT_INTERVAL_MS} ms"),
        ),
        (
            Refusal::ReportIntervalOutOfRange,
            format!("{} s", MAX_REPORT_INTERVAL_MS / 1000),
        ),
        (
            Refusal::DebounceOutOfRange,
            format!("{} s", MAX_DEBOUNCE_MS / 1000),
        ),
        (
            Refusal::TimeoutOutOfRange,
            format!("{} s", MAX_TIMEOUT_MS / 1000),
        ),
        (
            Refusal::SagMarginOutOfRange,
            format!("{} mV", MAX_SAG_MARGIN_UV / 1000),
        ),
        (
            Refusal::BurstLengthOutOfRange,
            format!("{MAX_BURST_SAMPLES} samples"),
        ),
        (
            Refusal::StorageCapacitanceOutOfRange,
            format!("{} F", MAX_STORAGE_UF / 1_000_000),
        ),
        (
            Refusal::LoadThresholdsOutOfRange,
            format!("{} V", MAX_LOAD_UV / 1_000_000),
        ),
        (
            Refusal::ChannelScaleOutOfRange(Channel::OutputCurrent),
            format!(
                "{} units per count (channel output_na)",
                MAX_SCALE_Q20 >> 20
            ),
        ),
    ];
    for (refusal, limit) in cases {
        let text = refusal.to_string();
        assert!(
            text.contains(&limit),
            "{refusal:?}: {text:?} lacks {limit:?}"
        );
    }
    // Worked by hand from the present limits (1 hour, 1 day, 1 V).
    assert_eq!(
        Refusal::ReportIntervalOutOfRange.to_string(),
        "report interval must be 100 ms to 3600 s"
    );
    assert_eq!(
        Refusal::TimeoutOutOfRange.to_string(),
        "timeouts and horizons must be 1 ms to 86400 s"
    );
}
