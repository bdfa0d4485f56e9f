//! Turning one received message's bytes into a request, or into a per-item refusal: a prost
//! decode error becomes INVALID_ARGUMENT with the field path prost found (its stack of
//! message/field names, outermost first, with a oneof named by the variant it was decoding), an
//! over-size message RESOURCE_EXHAUSTED. For stream items the refusal names the item's index in
//! the stream and, read best-effort from the undecodable bytes, the item id or sequence the
//! client gave it, so the client can tell which item it was.

use prost::Message;

use crate::convert::MAX_ID_LEN;
use crate::error::{ApiError, FieldViolation};

/// A received message that could not become a request.
#[derive(Debug, Clone, PartialEq)]
pub struct BadItem {
    /// Position of the message in its stream, from 0.
    pub index: u64,
    /// The raw bytes of the message when they were read (not for an over-size one), for the
    /// best-effort id lookups.
    pub raw: Option<prost::bytes::Bytes>,
    /// Why, as the error the item is answered with.
    pub error: ApiError,
}

impl BadItem {
    /// A top-level string field of the raw message (e.g. a fleet item's `item_id`), when it can
    /// be read and is a plausible id.
    pub fn string_field(&self, tag: u32) -> Option<String> {
        let value = top_level_field(self.raw.as_deref()?, tag)?;
        let Field::Bytes(bytes) = value else {
            return None;
        };
        let text = std::str::from_utf8(bytes).ok()?;
        (text.len() <= MAX_ID_LEN).then(|| text.to_string())
    }

    /// A top-level varint field of the raw message (e.g. a watch update's `sequence`).
    pub fn varint_field(&self, tag: u32) -> Option<u64> {
        match top_level_field(self.raw.as_deref()?, tag)? {
            Field::Varint(v) => Some(v),
            Field::Bytes(_) => None,
        }
    }
}

/// How the message's path starts in field violations: the request's top-level field or oneof,
/// used when prost names no field (the bytes are broken at the top level).
#[derive(Debug, Clone, Copy)]
pub struct ItemKind {
    /// Field path for errors at the top level (e.g. `night`, `item`, `update`).
    pub top_path: &'static str,
    /// Whether the message is an item of a stream (the description then names its index).
    pub in_stream: bool,
}

/// Decodes `raw` as `T`, or says why not.
pub fn decode<T: Message + Default>(
    raw: prost::bytes::Bytes,
    index: u64,
    kind: ItemKind,
) -> Result<T, BadItem> {
    T::decode(raw.clone()).map_err(|e| {
        let (path, reason) = field_path(&e);
        let field = if path.is_empty() {
            kind.top_path.to_string()
        } else {
            path
        };
        let description = if kind.in_stream {
            format!("item {index} of this stream cannot be decoded: {reason}")
        } else {
            format!("the request cannot be decoded: {reason}")
        };
        BadItem {
            index,
            raw: Some(raw),
            error: ApiError::InvalidArgument(vec![FieldViolation { field, description }]),
        }
    })
}

/// The refusal of a message longer than `limit_bytes` (its bytes are skipped unread).
pub fn too_large(index: u64, length_bytes: usize, limit_bytes: usize, kind: ItemKind) -> BadItem {
    let what = if kind.in_stream {
        format!("item {index} of this stream")
    } else {
        "the request".to_string()
    };
    BadItem {
        index,
        raw: None,
        error: ApiError::ResourceExhausted(format!(
            "{what} is {length_bytes} bytes, more than the server's limit of {limit_bytes} bytes \
             (max_decode_message_bytes)"
        )),
    }
}

/// The refusal of a message the gRPC framing itself makes unreadable (a compressed flag with no
/// compression agreed, or the input ending inside a message).
pub fn unreadable(index: u64, reason: &str, kind: ItemKind) -> BadItem {
    let description = if kind.in_stream {
        format!("item {index} of this stream cannot be read: {reason}")
    } else {
        format!("the request cannot be read: {reason}")
    };
    BadItem {
        index,
        raw: None,
        error: ApiError::InvalidArgument(vec![FieldViolation {
            field: kind.top_path.to_string(),
            description,
        }]),
    }
}

/// The oneofs of the API's stream requests: prost names the oneof, the path names the variant,
/// found from the message type decoded inside it.
const ONEOF_VARIANTS: [(&str, &str, &str); 8] = [
    ("AssessFleetRequest", "ZoneForecast", "zone_forecast"),
    ("AssessFleetRequest", "VehicleNight", "vehicle"),
    ("AssessFleetRequest", "DepotOutlets", "depot_outlets"),
    ("WatchFleetRequest", "WatchedVehicle", "vehicle"),
    ("WatchFleetRequest", "TelemetryUpdate", "telemetry"),
    ("WatchFleetRequest", "WatchZoneForecast", "zone_forecast"),
    ("WatchFleetRequest", "DepartureChange", "departure"),
    ("WatchFleetRequest", "VehicleRemoval", "removal"),
];

/// The field path (outermost first, dot separated) and the reason of a prost decode error.
///
/// prost's `Display` is `failed to decode Protobuf message: A.f: B.g: reason`, innermost
/// (message, field) pair first; it is the only public form of the stack.
pub fn field_path(e: &prost::DecodeError) -> (String, String) {
    let text = e.to_string();
    let mut rest = text
        .strip_prefix("failed to decode Protobuf message: ")
        .unwrap_or(&text);
    let mut stack: Vec<(&str, &str)> = Vec::new();
    while let Some((head, tail)) = rest.split_once(": ") {
        let Some((message, field)) = head.split_once('.') else {
            break;
        };
        let ident =
            |s: &str| !s.is_empty() && s.chars().all(|c| c.is_ascii_alphanumeric() || c == '_');
        if !(ident(message) && ident(field)) {
            break;
        }
        stack.push((message, field));
        rest = tail;
    }
    stack.reverse();
    let path: Vec<&str> = stack
        .iter()
        .enumerate()
        .map(|(i, &(message, field))| {
            let inner = stack.get(i + 1).map(|&(m, _)| m);
            ONEOF_VARIANTS
                .iter()
                .find(|&&(owner, variant_type, _)| owner == message && Some(variant_type) == inner)
                .map_or(field, |&(_, _, variant)| variant)
        })
        .collect();
    (path.join("."), rest.to_string())
}

/// A top-level field value read from raw protobuf bytes.
enum Field<'a> {
    Varint(u64),
    Bytes(&'a [u8]),
}

/// The last value of top-level field `tag` in `raw`, read as far as the bytes are well formed.
fn top_level_field(raw: &[u8], tag: u32) -> Option<Field<'_>> {
    let mut found = None;
    let mut rest = raw;
    while !rest.is_empty() {
        match next_field(&mut rest) {
            Some((field, value)) if field == u64::from(tag) => found = value,
            Some(_) => {}
            None => break,
        }
    }
    found
}

/// Reads one top-level field: its number and, for varints and length-delimited fields, value.
fn next_field<'a>(raw: &mut &'a [u8]) -> Option<(u64, Option<Field<'a>>)> {
    let key = read_varint(raw)?;
    let (field, wire_type) = (key >> 3, key & 7);
    let value = match wire_type {
        0 => Some(Field::Varint(read_varint(raw)?)),
        1 => {
            *raw = raw.get(8..)?;
            None
        }
        2 => {
            let len = usize::try_from(read_varint(raw)?).ok()?;
            let bytes = raw.get(..len)?;
            *raw = &raw[len..];
            Some(Field::Bytes(bytes))
        }
        5 => {
            *raw = raw.get(4..)?;
            None
        }
        _ => return None,
    };
    Some((field, value))
}

fn read_varint(raw: &mut &[u8]) -> Option<u64> {
    let mut value: u64 = 0;
    for shift in (0..64).step_by(7) {
        let (&byte, rest) = raw.split_first()?;
        *raw = rest;
        value |= u64::from(byte & 0x7f) << shift;
        if byte & 0x80 == 0 {
            return Some(value);
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use startmargin_proto::v1 as pb;

    const FLEET: ItemKind = ItemKind {
        top_path: "item",
        in_stream: true,
    };

    fn fleet_item_with_vehicle_id(id_bytes: &[u8]) -> Vec<u8> {
        // AssessFleetRequest { item_id: "it-7", vehicle: VehicleNight { vehicle: VehicleProfile
        // { vehicle_id: <id_bytes> } } }
        let profile = [&[0x0a, id_bytes.len() as u8][..], id_bytes].concat();
        let night = [&[0x0a, profile.len() as u8][..], &profile].concat();
        [&[0x1a, 4][..], b"it-7", &[0x12, night.len() as u8], &night].concat()
    }

    #[test]
    fn invalid_utf8_names_the_field_and_the_item() {
        let raw = fleet_item_with_vehicle_id(&[0xff, 0xfe]);
        let bad = decode::<pb::AssessFleetRequest>(raw.into(), 7, FLEET).expect_err("bad");
        let ApiError::InvalidArgument(v) = &bad.error else {
            panic!("{:?}", bad.error)
        };
        assert_eq!(v[0].field, "vehicle.vehicle.vehicle_id");
        assert!(v[0].description.contains("item 7"), "{}", v[0].description);
        assert_eq!(bad.string_field(3).as_deref(), Some("it-7"));
    }

    #[test]
    fn valid_bytes_decode() {
        let raw = fleet_item_with_vehicle_id(b"truck-1");
        let item = decode::<pb::AssessFleetRequest>(raw.into(), 0, FLEET).expect("decodes");
        assert_eq!(item.item_id, "it-7");
    }

    #[test]
    fn broken_top_level_falls_back_to_the_top_path() {
        // A lone continuation byte, a wire type 7 key, and an item_id whose length runs past
        // the end (prost names that field).
        let cases: [(&[u8], &str); 3] = [
            (&[0xff], "item"),
            (&[0x07], "item"),
            (&[0x1a, 0x7f, b'a'], "item_id"),
        ];
        for (raw, field) in cases {
            let bad = decode::<pb::AssessFleetRequest>(raw.to_vec().into(), 3, FLEET)
                .expect_err("broken");
            let ApiError::InvalidArgument(v) = &bad.error else {
                panic!("{:?}", bad.error)
            };
            assert_eq!(v[0].field, field, "{raw:?}: {v:?}");
            assert_eq!(bad.string_field(3), None);
        }
    }

    #[test]
    fn sequence_is_read_from_a_broken_watch_update() {
        // sequence = 42, then a vehicle update whose length runs past the end.
        let raw = vec![0x30, 42, 0x0a, 0x40, 0x01];
        let bad = decode::<pb::WatchFleetRequest>(
            raw.into(),
            0,
            ItemKind {
                top_path: "update",
                in_stream: true,
            },
        )
        .expect_err("broken");
        assert_eq!(bad.varint_field(6), Some(42));
    }

    #[test]
    fn over_size_is_resource_exhausted() {
        let bad = too_large(2, 10_000, 1_024, FLEET);
        assert_eq!(bad.error.code(), tonic::Code::ResourceExhausted);
    }
}
