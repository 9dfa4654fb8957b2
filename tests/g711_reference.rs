//! G.711 against the outside world: Python's `audioop` module (CPython's C implementation of G.711, derived from
//! the Sun Microsystems reference code), run through the project's pinned Python.
mod common;

use stairstep::codec::g711::{alaw_to_linear, linear_to_alaw, linear_to_ulaw, ulaw_to_linear};

/// Every 16-bit sample, −32768 to 32767, as little-endian bytes.
fn all_samples() -> (Vec<i16>, Vec<u8>) {
    let xs: Vec<i16> = (i16::MIN..=i16::MAX).collect();
    let bytes = xs.iter().flat_map(|x| x.to_le_bytes()).collect();
    (xs, bytes)
}

/// Runs `audioop.<func>(stdin, 2)` and returns its raw output bytes.
fn audioop(func: &str, input: &[u8]) -> Vec<u8> {
    let code = format!(
        "import sys, warnings\n\
         warnings.simplefilter('ignore', DeprecationWarning)\n\
         import audioop\n\
         sys.stdout.buffer.write(audioop.{func}(sys.stdin.buffer.read(), 2))\n"
    );
    common::run_python(&code, input)
}

fn count_equal<T: PartialEq>(a: &[T], b: &[T]) -> usize {
    a.iter().zip(b).filter(|(x, y)| x == y).count()
}

// Source: Python audioop.lin2ulaw(fragment, width=2).
#[test]
fn ulaw_encoding_matches_audioop_on_all_65536_inputs() {
    let (xs, bytes) = all_samples();
    let reference = audioop("lin2ulaw", &bytes);
    assert_eq!(reference.len(), 65_536);
    let ours: Vec<u8> = xs.iter().map(|&x| linear_to_ulaw(x)).collect();
    let equal = count_equal(&ours, &reference);
    println!("{equal}/65536 μ-law codes equal audioop.lin2ulaw");
    let first = ours.iter().zip(&reference).position(|(a, b)| a != b);
    assert_eq!(equal, 65_536, "first difference at input {:?}", first.map(|i| xs[i]));
}

// Source: Python audioop.lin2alaw(fragment, width=2).
#[test]
fn alaw_encoding_matches_audioop_on_all_65536_inputs() {
    let (xs, bytes) = all_samples();
    let reference = audioop("lin2alaw", &bytes);
    assert_eq!(reference.len(), 65_536);
    let ours: Vec<u8> = xs.iter().map(|&x| linear_to_alaw(x)).collect();
    let equal = count_equal(&ours, &reference);
    println!("{equal}/65536 A-law codes equal audioop.lin2alaw");
    let first = ours.iter().zip(&reference).position(|(a, b)| a != b);
    assert_eq!(equal, 65_536, "first difference at input {:?}", first.map(|i| xs[i]));
}

fn decoded(reference: &[u8]) -> Vec<i16> {
    reference.chunks_exact(2).map(|b| i16::from_le_bytes([b[0], b[1]])).collect()
}

// Source: Python audioop.ulaw2lin(fragment, width=2).
#[test]
fn ulaw_decoding_matches_audioop_on_all_256_codes() {
    let codes: Vec<u8> = (0..=255).collect();
    let reference = decoded(&audioop("ulaw2lin", &codes));
    assert_eq!(reference.len(), 256);
    let ours: Vec<i16> = codes.iter().map(|&c| ulaw_to_linear(c)).collect();
    let equal = count_equal(&ours, &reference);
    println!("{equal}/256 μ-law decoded values equal audioop.ulaw2lin");
    assert_eq!(ours, reference);
}

// Source: Python audioop.alaw2lin(fragment, width=2).
#[test]
fn alaw_decoding_matches_audioop_on_all_256_codes() {
    let codes: Vec<u8> = (0..=255).collect();
    let reference = decoded(&audioop("alaw2lin", &codes));
    assert_eq!(reference.len(), 256);
    let ours: Vec<i16> = codes.iter().map(|&c| alaw_to_linear(c)).collect();
    let equal = count_equal(&ours, &reference);
    println!("{equal}/256 A-law decoded values equal audioop.alaw2lin");
    assert_eq!(ours, reference);
}
