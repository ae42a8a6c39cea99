//! ONNX external data: locations checked (relative, inside the model's folder) and inlined.

use super::*;

pub(super) const EXTERNAL: i32 = 1;

/// Checks an external-data location: a relative path of normal components only.
pub(super) fn check_location(tensor: &str, location: &str) -> Result<()> {
    let bad = |reason: &str| Error::ExternalDataLocation {
        tensor: tensor.to_string(),
        location: location.to_string(),
        reason: reason.to_string(),
    };
    if location.is_empty() {
        return Err(bad("is empty"));
    }
    let p = Path::new(location);
    if p.is_absolute() || location.starts_with('/') || location.starts_with('\\') || location.contains(':') {
        return Err(bad("is an absolute path"));
    }
    for c in p.components() {
        match c {
            Component::Normal(_) | Component::CurDir => {}
            Component::ParentDir => return Err(bad("leaves the model's folder (`..`)")),
            _ => return Err(bad("is not a plain relative path")),
        }
    }
    Ok(())
}

/// Inlines all external data into `raw_data`, returning the files used.
pub(super) fn resolve_external_data(
    proto: &mut pb::ModelProto,
    dir: Option<&Path>,
    limits: &Limits,
    total: &mut u64,
) -> Result<Vec<String>> {
    let mut files: BTreeMap<String, Vec<u8>> = BTreeMap::new();
    let Some(graph) = proto.graph.as_mut() else { return Ok(vec![]) };
    let canonical_dir = match dir {
        Some(d) => Some(d.canonicalize().map_err(|e| Error::io("open the folder", d, e))?),
        None => None,
    };
    for_each_tensor_mut(graph, &mut |t| {
        if t.data_location != Some(EXTERNAL) {
            return Ok(());
        }
        let get = |k: &str| t.external_data.iter().find(|e| e.key == k).map(|e| e.value.clone());
        let location = get("location").ok_or_else(|| Error::ExternalDataLocation {
            tensor: t.name.clone(),
            location: String::new(),
            reason: "is missing (no `location` key)".into(),
        })?;
        check_location(&t.name, &location)?;
        let Some(dir) = canonical_dir.as_ref() else {
            return Err(Error::ExternalDataNeedsPath { tensor: t.name.clone(), location });
        };
        if !files.contains_key(&location) {
            let path = dir.join(&location);
            let real = path.canonicalize().map_err(|e| Error::ExternalDataMissing {
                tensor: t.name.clone(),
                path: path.clone(),
                source: e,
            })?;
            if !real.starts_with(dir) {
                return Err(Error::ExternalDataLocation {
                    tensor: t.name.clone(),
                    location: location.clone(),
                    reason: "resolves (through a link) outside the model's folder".into(),
                });
            }
            let len = std::fs::metadata(&real)
                .map_err(|e| Error::ExternalDataMissing {
                    tensor: t.name.clone(),
                    path: real.clone(),
                    source: e,
                })?
                .len();
            *total += len;
            check_limit(
                "the model's size in bytes with its external data",
                *total,
                limits.max_model_bytes,
                "Limits::max_model_bytes",
            )?;
            let data = std::fs::read(&real).map_err(|e| Error::ExternalDataMissing {
                tensor: t.name.clone(),
                path: real.clone(),
                source: e,
            })?;
            files.insert(location.clone(), data);
        }
        let data = &files[&location];
        let parse_num = |key: &str| -> Result<Option<u64>> {
            match get(key) {
                None => Ok(None),
                Some(v) => v.trim().parse::<u64>().map(Some).map_err(|_| Error::ExternalDataRange {
                    tensor: t.name.clone(),
                    reason: format!("external data `{key}` is `{v}`, expected a byte count"),
                }),
            }
        };
        let offset = parse_num("offset")?.unwrap_or(0);
        let elems = element_count(t)?;
        let size = elem_size(t.data_type).ok_or_else(|| Error::ExternalDataRange {
            tensor: t.name.clone(),
            reason: format!("external data of element type {} is not supported", dtype_name(t.data_type)),
        })? as u64;
        let expected = elems.saturating_mul(size);
        let length = parse_num("length")?.unwrap_or(expected);
        if length != expected {
            return Err(Error::ExternalDataRange {
                tensor: t.name.clone(),
                reason: format!(
                    "external data length is {length} bytes but its shape {:?} of {} needs {expected}",
                    t.dims,
                    dtype_name(t.data_type)
                ),
            });
        }
        let end = offset.checked_add(length).filter(|&e| e <= data.len() as u64).ok_or_else(|| Error::ExternalDataRange {
            tensor: t.name.clone(),
            reason: format!(
                "external data at offset {offset} of {length} bytes runs past the end of `{location}` ({} bytes)",
                data.len()
            ),
        })?;
        t.raw_data = data[offset as usize..end as usize].to_vec();
        t.data_location = None;
        t.external_data.clear();
        Ok(())
    })?;
    Ok(files.into_keys().collect())
}

#[cfg(test)]
mod tests {
    use super::check_location;

    #[test]
    fn only_plain_relative_locations_inside_the_folder_pass() {
        for ok in ["w.bin", "./w.bin", "data/w.bin", "a/./b.data"] {
            check_location("t", ok).unwrap_or_else(|e| panic!("{ok}: {e}"));
        }
        for (bad, why) in [
            ("", "is empty"),
            ("/etc/passwd", "absolute"),
            ("\\\\server\\share", "absolute"),
            ("C:\\w.bin", "absolute"),
            ("../w.bin", "leaves the model's folder"),
            ("data/../../w.bin", "leaves the model's folder"),
        ] {
            let e = check_location("weights", bad).unwrap_err().to_string();
            assert!(e.contains(why) && e.contains("`weights`"), "{bad:?}: {e}");
        }
    }
}
