//! Sniffing the bytes before decoding: empty files, HTML pages, Git LFS pointers and
//! non-protobuf data are named for what they are.

use super::*;

pub(super) fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// Names the common ways a file that is not a model reaches a loader.
pub(super) fn sniff(bytes: &[u8], what: &str) -> Result<()> {
    if bytes.is_empty() {
        return Err(Error::EmptyModel { what: what.to_string() });
    }
    let head = &bytes[..bytes.len().min(512)];
    let text = String::from_utf8_lossy(head);
    let trimmed = text.trim_start_matches(['\u{feff}', ' ', '\t', '\r', '\n']).to_ascii_lowercase();
    if trimmed.starts_with("<!doctype html")
        || trimmed.starts_with("<html")
        || trimmed.starts_with("<?xml") && trimmed.contains("<html")
    {
        return Err(Error::HtmlPage { what: what.to_string() });
    }
    if trimmed.starts_with("version https://git-lfs.github.com/spec/") {
        return Err(Error::LfsPointer { what: what.to_string(), size: bytes.len() });
    }
    // An ONNX ModelProto starts with a field key: a varint whose low three bits are a wire type
    // in 0..=5 and whose field number is at least 1. Text files never do.
    let printable = head.iter().all(|&b| b == b'\n' || b == b'\r' || b == b'\t' || (0x20..0x7f).contains(&b));
    if printable && bytes.len() >= 8 {
        return Err(Error::NotOnnx {
            what: what.to_string(),
            reason: format!(
                "it is plain text (starts with {:?}), while ONNX models are binary protobuf",
                first_line(&text)
            ),
        });
    }
    Ok(())
}

pub(super) fn first_line(text: &str) -> String {
    let line = text.lines().next().unwrap_or("");
    line.chars().take(40).collect()
}

pub(super) fn decode(bytes: &[u8], what: &str) -> Result<pb::ModelProto> {
    use prost::Message;
    let proto = pb::ModelProto::decode(bytes).map_err(|e| Error::NotOnnx {
        what: what.to_string(),
        reason: format!("its protobuf does not decode as an ONNX ModelProto ({e}); is the file truncated or of another format?"),
    })?;
    if proto.graph.is_none() {
        return Err(Error::NotOnnx {
            what: what.to_string(),
            reason: "it decodes as protobuf but holds no graph".into(),
        });
    }
    if proto.ir_version <= 0 && proto.opset_import.is_empty() {
        return Err(Error::NotOnnx {
            what: what.to_string(),
            reason: "it has neither an IR version nor an opset import".into(),
        });
    }
    Ok(proto)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn files_that_are_not_models_are_named() {
        assert!(matches!(sniff(b"", "m"), Err(Error::EmptyModel { .. })));
        assert!(matches!(sniff(b"\xef\xbb\xbf  <!DOCTYPE html><html>", "m"), Err(Error::HtmlPage { .. })));
        let lfs = b"version https://git-lfs.github.com/spec/v1\noid sha256:ab\nsize 12\n";
        assert!(matches!(sniff(lfs, "m"), Err(Error::LfsPointer { size: 65, .. })));
        match sniff(b"name,value\n1,2\n", "m") {
            Err(Error::NotOnnx { reason, .. }) => assert!(reason.contains("\"name,value\""), "{reason}"),
            other => panic!("{other:?}"),
        }
        // Binary protobuf (field 1, varint: the IR version) passes the sniff.
        sniff(&[0x08, 0x08, 0x12, 0x00, 0x01, 0x02, 0x03, 0x04], "m").unwrap();
        // It holds no graph: decoding says so.
        let e = decode(&[0x08, 0x08], "m").unwrap_err().to_string();
        assert!(e.contains("holds no graph"), "{e}");
    }
}
