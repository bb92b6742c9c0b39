//! A long series of numbers passed to the page as the bytes of its `f64`s (little-endian), so
//! the bridge hands over one byte array instead of building a JavaScript array element by
//! element. serde-wasm-bindgen turns bytes into a `Uint8Array` and back in one copy; the page
//! never reads these series itself (it passes them back to the drawing exports), so nothing
//! is lost. A plain JSON encoder writes the bytes as an array of numbers, which this module
//! also reads, so the native tests round-trip unchanged.
//!
//! Use on a field with `#[serde(with = "crate::packed")]`.

use serde::de::{Error, SeqAccess, Visitor};
use serde::{Deserializer, Serializer};

const WIDTH: usize = std::mem::size_of::<f64>();

pub fn serialize<S: Serializer>(values: &[f64], serializer: S) -> Result<S::Ok, S::Error> {
    let bytes: Vec<u8> = values.iter().flat_map(|v| v.to_le_bytes()).collect();
    serializer.serialize_bytes(&bytes)
}

pub fn deserialize<'de, D: Deserializer<'de>>(deserializer: D) -> Result<Vec<f64>, D::Error> {
    deserializer.deserialize_byte_buf(PackedVisitor)
}

fn unpack<E: Error>(bytes: &[u8]) -> Result<Vec<f64>, E> {
    if !bytes.len().is_multiple_of(WIDTH) {
        return Err(E::custom(format!(
            "a packed series of {} bytes is not a whole number of {WIDTH}-byte numbers",
            bytes.len()
        )));
    }
    Ok(bytes
        .chunks_exact(WIDTH)
        .map(|chunk| {
            let mut word = [0u8; WIDTH];
            word.copy_from_slice(chunk);
            f64::from_le_bytes(word)
        })
        .collect())
}

struct PackedVisitor;

impl<'de> Visitor<'de> for PackedVisitor {
    type Value = Vec<f64>;

    fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
        f.write_str("the little-endian bytes of a series of f64")
    }

    fn visit_bytes<E: Error>(self, bytes: &[u8]) -> Result<Self::Value, E> {
        unpack(bytes)
    }

    fn visit_byte_buf<E: Error>(self, bytes: Vec<u8>) -> Result<Self::Value, E> {
        unpack(&bytes)
    }

    fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Self::Value, A::Error> {
        let mut bytes = Vec::with_capacity(seq.size_hint().unwrap_or(0));
        while let Some(byte) = seq.next_element::<u8>()? {
            bytes.push(byte);
        }
        unpack(&bytes)
    }
}

#[cfg(test)]
mod tests {
    use serde::{Deserialize, Serialize};

    #[derive(Debug, PartialEq, Serialize, Deserialize)]
    struct Series {
        #[serde(with = "super")]
        values: Vec<f64>,
    }

    #[test]
    fn every_bit_survives_a_round_trip() {
        let series =
            Series { values: vec![0.0, -0.0, 1.5e-300, -7.25, f64::MAX, f64::MIN_POSITIVE, 1.0 / 3.0] };
        let text = serde_json::to_string(&series).unwrap_or_default();
        let back: Series = serde_json::from_str(&text).unwrap_or_else(|e| unreachable!("{e}: {text}"));
        let bits = |s: &Series| s.values.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&back), bits(&series));
    }

    #[test]
    fn a_truncated_series_is_refused_with_its_length() {
        let error = serde_json::from_str::<Series>(r#"{"values": [0, 0, 0]}"#).err().map(|e| e.to_string());
        assert!(error.is_some_and(|e| e.contains("3 bytes")), "a 3-byte series must be refused");
    }
}
