//! The JSON writer: the result structs as they are, pretty-printed.

use serde::Serialize;

/// Serializes any result to pretty JSON bytes, ending with a newline.
pub fn to_json<T: Serialize>(result: &T) -> Vec<u8> {
    let mut out = serde_json::to_vec_pretty(result).unwrap_or_else(|e| {
        format!("{{\"error\": \"cannot serialize the result: {e}\"}}").into_bytes()
    });
    out.push(b'\n');
    out
}
