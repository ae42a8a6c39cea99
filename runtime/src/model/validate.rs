//! Protobuf-level validation: tensor sizes against their shapes, graph wiring and cycles, and
//! operators this build's tract registers.

use super::*;

/// Checks that each stored tensor holds as many bytes as its shape says; returns the parameter
/// count and weight bytes.
pub(super) fn check_tensors(graph: &pb::GraphProto) -> Result<(u64, u64)> {
    let mut params = 0u64;
    let mut bytes = 0u64;
    for_each_tensor(graph, &mut |t| {
        let n = element_count(t)?;
        let held = if !t.raw_data.is_empty() {
            // tract reads raw bytes of these element types only (tract-onnx's tensor loader).
            const RAW_READABLE: &[i32] = &[1, 2, 3, 4, 5, 6, 7, 9, 10, 11, 12, 13];
            if !RAW_READABLE.contains(&t.data_type) {
                return Err(Error::Graph {
                    reason: format!(
                        "tensor `{}` stores {} as raw bytes, which genloom cannot read (it reads float, \
                         float16, double, int8 to int64, uint8 to uint64 and bool)",
                        t.name,
                        dtype_name(t.data_type)
                    ),
                });
            }
            let Some(size) = elem_size(t.data_type) else { return Ok(()) };
            let expected = n.saturating_mul(size as u64);
            if t.raw_data.len() as u64 != expected {
                return Err(Error::TensorSize {
                    tensor: t.name.clone(),
                    shape: t.dims.clone(),
                    dtype: dtype_name(t.data_type),
                    actual: t.raw_data.len(),
                    expected: expected as usize,
                });
            }
            expected
        } else {
            let count = (t.float_data.len()
                + t.int32_data.len()
                + t.int64_data.len()
                + t.double_data.len()
                + t.uint64_data.len()) as u64;
            if count != 0 && count != n && t.data_type != 8 {
                return Err(Error::TensorSize {
                    tensor: t.name.clone(),
                    shape: t.dims.clone(),
                    dtype: dtype_name(t.data_type),
                    actual: count as usize,
                    expected: n as usize,
                });
            }
            n * elem_size(t.data_type).unwrap_or(4) as u64
        };
        params += n;
        bytes += held;
        Ok(())
    })?;
    Ok((params, bytes))
}

/// Every node input must be produced by something, and the graph must be acyclic.
pub(super) fn check_graph(graph: &pb::GraphProto) -> Result<()> {
    let mut known: HashSet<&str> = graph.input.iter().map(|i| i.name.as_str()).collect();
    known.extend(graph.initializer.iter().map(|t| t.name.as_str()));
    let mut producer: HashMap<&str, usize> = HashMap::new();
    for (i, n) in graph.node.iter().enumerate() {
        for o in &n.output {
            if !o.is_empty() {
                producer.insert(o.as_str(), i);
            }
        }
    }
    for n in &graph.node {
        for inp in &n.input {
            if !inp.is_empty() && !known.contains(inp.as_str()) && !producer.contains_key(inp.as_str()) {
                return Err(Error::Graph {
                    reason: format!(
                        "node `{}` ({}) reads `{inp}`, which no node, input or initializer provides",
                        n.name, n.op_type
                    ),
                });
            }
        }
    }
    for o in &graph.output {
        if !known.contains(o.name.as_str()) && !producer.contains_key(o.name.as_str()) {
            return Err(Error::Graph { reason: format!("graph output `{}` is produced by no node", o.name) });
        }
    }
    // Kahn's algorithm over node -> node edges.
    let mut indegree = vec![0usize; graph.node.len()];
    let mut users: Vec<Vec<usize>> = vec![vec![]; graph.node.len()];
    for (i, n) in graph.node.iter().enumerate() {
        for inp in &n.input {
            if let Some(&p) = producer.get(inp.as_str()) {
                if !known.contains(inp.as_str()) {
                    indegree[i] += 1;
                    users[p].push(i);
                }
            }
        }
    }
    let mut ready: Vec<usize> = (0..graph.node.len()).filter(|&i| indegree[i] == 0).collect();
    let mut seen = 0;
    while let Some(i) = ready.pop() {
        seen += 1;
        for &u in &users[i] {
            indegree[u] -= 1;
            if indegree[u] == 0 {
                ready.push(u);
            }
        }
    }
    if seen != graph.node.len() {
        let stuck = (0..graph.node.len())
            .find(|&i| indegree[i] > 0)
            .map(|i| graph.node[i].name.clone())
            .unwrap_or_default();
        return Err(Error::Graph {
            reason: format!("it has a cycle (through node `{stuck}`); ONNX graphs must be acyclic"),
        });
    }
    Ok(())
}

/// Refuses a graph with an operator tract has no builder for, naming it, before tract turns it
/// into a placeholder that fails later with a less useful message.
pub(super) fn check_operators(proto: &pb::ModelProto, known: impl Fn(&str) -> bool) -> Result<()> {
    let Some(graph) = proto.graph.as_ref() else { return Ok(()) };
    for (ix, n) in graph.node.iter().enumerate() {
        if !known(&n.op_type) {
            let node = if n.name.is_empty() { format!("#{ix}") } else { n.name.clone() };
            #[cfg(target_arch = "wasm32")]
            let (build, hint) = (
                "genloom's web build",
                "; the web build carries the operators image generators are made of (the list is in \
                 bindings/wasm/README.md); native genloom runs every operator tract knows",
            );
            #[cfg(not(target_arch = "wasm32"))]
            let (build, hint) = ("this build of genloom", "");
            return Err(Error::UnsupportedOperator { node, op_type: n.op_type.clone(), build, hint });
        }
    }
    Ok(())
}
