//! `einsum`: `Einsum` nodes of one or two operands rewritten exactly into `Transpose`,
//! `Unsqueeze`, `Mul` and `ReduceSum`, which tract runs with its fast kernels (its own Einsum
//! path was the slowest part of a style-based generator's modulated convolutions).
//!
//! A batched matrix product (`bmk,bkn->bmn` up to the order of the letters, the attention form)
//! becomes `Transpose` and `MatMul`. Otherwise the rewrite follows the definition of the operator (ONNX operator specification, Einsum, and
//! numpy.einsum): the result at each output index is the sum, over the letters missing from the
//! output, of the product of the operands at the matching indices. So each operand is first summed
//! over letters no one else reads, then its axes are ordered as "output letters, then summed
//! letters" and the letters it lacks are inserted as axes of size 1; the two line up by
//! broadcasting, are multiplied, and the summed axes are reduced. Only the order of the additions
//! changes, so results agree up to float rounding.
//!
//! Left alone: three or more operands, an ellipsis, a letter repeated within one operand (a
//! diagonal or a trace), an implicit output (no `->`).

use super::*;

/// One parsed equation: each operand's letters and the output's.
#[derive(Debug, PartialEq)]
pub(super) struct Equation {
    pub inputs: Vec<Vec<char>>,
    pub output: Vec<char>,
}

/// Parses the forms this pass rewrites; `None` for the rest.
pub(super) fn parse(equation: &str) -> Option<Equation> {
    let eq: String = equation.chars().filter(|c| !c.is_whitespace()).collect();
    let (lhs, rhs) = eq.split_once("->")?;
    let letters = |s: &str| -> Option<Vec<char>> {
        let v: Vec<char> = s.chars().collect();
        let distinct = v.iter().enumerate().all(|(i, c)| !v[..i].contains(c));
        (v.iter().all(|c| c.is_ascii_alphabetic()) && distinct).then_some(v)
    };
    let inputs: Vec<Vec<char>> = lhs.split(',').map(letters).collect::<Option<_>>()?;
    let output = letters(rhs)?;
    if inputs.is_empty() || inputs.len() > 2 || output.iter().any(|c| !inputs.iter().any(|i| i.contains(c))) {
        return None;
    }
    Some(Equation { inputs, output })
}

/// Builds nodes for the opset at hand: axes as attributes before 13, as inputs from 13 on.
struct Builder<'a> {
    names: &'a mut Names,
    opset: i64,
    base: String,
    nodes: Vec<pb::NodeProto>,
    initializers: Vec<pb::TensorProto>,
}

impl Builder<'_> {
    fn node(&mut self, op: &str, inputs: Vec<String>, attrs: Vec<pb::AttributeProto>) -> String {
        let out = self.names.fresh(&format!("{}_{}", self.base, op.to_lowercase()));
        self.nodes.push(pb::NodeProto {
            name: out.clone(),
            op_type: op.into(),
            input: inputs,
            output: vec![out.clone()],
            attribute: attrs,
            ..Default::default()
        });
        out
    }

    fn ints(name: &str, v: &[i64]) -> pb::AttributeProto {
        pb::AttributeProto { name: name.into(), r#type: 7, ints: v.to_vec(), ..Default::default() }
    }

    /// An op whose `axes` moved from attribute to input at opset 13 (`ReduceSum`, `Unsqueeze`).
    fn with_axes(&mut self, op: &str, x: String, axes: &[i64], mut attrs: Vec<pb::AttributeProto>) -> String {
        if self.opset >= 13 {
            let name = self.names.fresh(&format!("{}_axes", self.base));
            self.initializers.push(onnx::i64_tensor(&name, &[axes.len() as i64], axes));
            self.node(op, vec![x, name], attrs)
        } else {
            attrs.push(Self::ints("axes", axes));
            self.node(op, vec![x], attrs)
        }
    }

    fn reduce_sum(&mut self, x: String, axes: &[i64]) -> String {
        let keep = pb::AttributeProto { name: "keepdims".into(), r#type: 2, i: 0, ..Default::default() };
        self.with_axes("ReduceSum", x, axes, vec![keep])
    }

    fn transpose(&mut self, x: String, perm: &[i64]) -> String {
        if perm.iter().enumerate().all(|(i, &p)| p == i as i64) {
            return x;
        }
        self.node("Transpose", vec![x], vec![Self::ints("perm", perm)])
    }

    /// One operand brought to the axis order of `all`: summed over letters only it has (and
    /// the output lacks), transposed, with size-1 axes for the letters it lacks.
    fn align(
        &mut self,
        x: String,
        letters: &[char],
        others: &[char],
        output: &[char],
        all: &[char],
    ) -> String {
        let private: Vec<i64> = letters
            .iter()
            .enumerate()
            .filter(|(_, c)| !others.contains(c) && !output.contains(c))
            .map(|(i, _)| i as i64)
            .collect();
        let (x, kept): (String, Vec<char>) = if private.is_empty() {
            (x, letters.to_vec())
        } else {
            let kept = letters
                .iter()
                .enumerate()
                .filter(|(i, _)| !private.contains(&(*i as i64)))
                .map(|(_, &c)| c)
                .collect();
            (self.reduce_sum(x, &private), kept)
        };
        let mut order: Vec<usize> = (0..kept.len()).collect();
        order.sort_by_key(|&i| all.iter().position(|c| *c == kept[i]));
        let x = self.transpose(x, &order.iter().map(|&i| i as i64).collect::<Vec<_>>());
        let missing: Vec<i64> =
            all.iter().enumerate().filter(|(_, c)| !kept.contains(c)).map(|(i, _)| i as i64).collect();
        if missing.is_empty() {
            x
        } else {
            self.with_axes("Unsqueeze", x, &missing, vec![])
        }
    }
}

/// How a two-operand equation maps onto one MatMul: axis orders for each operand and for the
/// result.
struct MatMulForm {
    perm_a: Vec<i64>,
    perm_b: Vec<i64>,
    perm_out: Vec<i64>,
}

/// Two operands whose letters are batch letters (in both and the output), exactly one letter
/// `m` of the first and the output, one `n` of the second and the output, and one summed letter
/// `k` of both: `bmk,bkn->bmn` up to the order of the letters, which is what exporters write
/// for attention.
fn matmul_form(eq: &Equation) -> Option<MatMulForm> {
    let [a, b] = &eq.inputs[..] else { return None };
    let out = &eq.output;
    let only = |pred: &dyn Fn(&char) -> bool, from: &[char]| -> Vec<char> {
        from.iter().filter(|c| pred(c)).copied().collect()
    };
    let batch = only(&|c| b.contains(c) && out.contains(c), a);
    let m = only(&|c| !b.contains(c) && out.contains(c), a);
    let n = only(&|c| !a.contains(c) && out.contains(c), b);
    let k = only(&|c| b.contains(c) && !out.contains(c), a);
    let private = a.iter().chain(b.iter()).any(|c| !(out.contains(c) || a.contains(c) && b.contains(c)));
    if m.len() != 1 || n.len() != 1 || k.len() != 1 || private {
        return None;
    }
    let position = |letters: &[char], c: char| letters.iter().position(|x| *x == c).map(|p| p as i64);
    let mut order_a: Vec<char> = batch.clone();
    order_a.extend([m[0], k[0]]);
    let mut order_b: Vec<char> = batch.clone();
    order_b.extend([k[0], n[0]]);
    let mut product: Vec<char> = batch;
    product.extend([m[0], n[0]]);
    Some(MatMulForm {
        perm_a: order_a.iter().map(|&c| position(a, c)).collect::<Option<_>>()?,
        perm_b: order_b.iter().map(|&c| position(b, c)).collect::<Option<_>>()?,
        perm_out: out.iter().map(|&c| position(&product, c)).collect::<Option<_>>()?,
    })
}

pub(super) fn rewrite_einsum(g: &mut pb::GraphProto, opset: i64) -> Result<Vec<String>> {
    let mut changes = vec![];
    let mut names = Names::of(g);
    let mut i = 0;
    while i < g.node.len() {
        let n = &g.node[i];
        let eq = onnx::attr(n, "equation").map(|a| String::from_utf8_lossy(&a.s).into_owned());
        let parsed = eq.as_deref().and_then(parse);
        let (Some(eq_text), Some(eq), true) = (eq.clone(), parsed, n.op_type == "Einsum") else {
            i += 1;
            continue;
        };
        if n.input.len() != eq.inputs.len() || n.output.len() != 1 {
            i += 1;
            continue;
        }
        let base = if n.name.is_empty() { "einsum".to_string() } else { n.name.clone() };
        let out_name = n.output[0].clone();
        let inputs = n.input.clone();
        let node_name = n.name.clone();
        // The letters in order: the output's, then the summed ones as they first appear.
        let mut all = eq.output.clone();
        for c in eq.inputs.iter().flatten() {
            if !all.contains(c) {
                all.push(*c);
            }
        }
        let summed: Vec<i64> = (eq.output.len()..all.len()).map(|i| i as i64).collect();
        let mut b = Builder { names: &mut names, opset, base, nodes: vec![], initializers: vec![] };
        let result = if let Some(plan) = matmul_form(&eq) {
            // A batched matrix product: MatMul on operands ordered [batch.., M, K] and
            // [batch.., K, N], then the output order.
            let a = b.transpose(inputs[0].clone(), &plan.perm_a);
            let c = b.transpose(inputs[1].clone(), &plan.perm_b);
            let product = b.node("MatMul", vec![a, c], vec![]);
            b.transpose(product, &plan.perm_out)
        } else if eq.inputs.len() == 1 {
            // One operand: sum the letters the output lacks, then order as the output.
            let letters = &eq.inputs[0];
            let gone: Vec<i64> = letters
                .iter()
                .enumerate()
                .filter(|(_, c)| !eq.output.contains(c))
                .map(|(i, _)| i as i64)
                .collect();
            let kept: Vec<char> = letters.iter().filter(|c| eq.output.contains(c)).copied().collect();
            let x = if gone.is_empty() { inputs[0].clone() } else { b.reduce_sum(inputs[0].clone(), &gone) };
            let perm: Vec<i64> =
                eq.output.iter().map(|c| kept.iter().position(|k| k == c).unwrap_or(0) as i64).collect();
            b.transpose(x, &perm)
        } else {
            let a = b.align(inputs[0].clone(), &eq.inputs[0], &eq.inputs[1], &eq.output, &all);
            let c = b.align(inputs[1].clone(), &eq.inputs[1], &eq.inputs[0], &eq.output, &all);
            // Both now have one axis per letter of `all` (size 1 where an operand lacks the
            // letter, or summed it already): multiply, then reduce every summed letter.
            let product = b.node("Mul", vec![a, c], vec![]);
            let axes = summed.clone();
            if axes.is_empty() {
                product
            } else {
                b.reduce_sum(product, &axes)
            }
        };
        let Builder { mut nodes, initializers, .. } = b;
        if nodes.is_empty() {
            // `ij->ij`: the output is the input itself.
            nodes.push(pb::NodeProto {
                name: names.fresh(&format!("{node_name}_identity")),
                op_type: "Identity".into(),
                input: vec![result],
                output: vec![out_name.clone()],
                ..Default::default()
            });
        } else {
            // The last node writes the Einsum's output name, so readers need no renaming.
            let last = nodes.last_mut().expect("not empty");
            let old = last.output[0].clone();
            last.output[0] = out_name.clone();
            for n in nodes.iter_mut() {
                for inp in n.input.iter_mut() {
                    if *inp == old {
                        *inp = out_name.clone();
                    }
                }
            }
        }
        let count = nodes.len();
        g.initializer.extend(initializers);
        g.node.splice(i..=i, nodes);
        changes.push(format!("Einsum `{node_name}` (\"{eq_text}\") written as {count} nodes"));
        i += count;
    }
    Ok(changes)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_the_forms_it_rewrites_and_refuses_the_rest() {
        let e = parse("oihw, bi -> boihw").unwrap();
        assert_eq!(e.inputs, vec![vec!['o', 'i', 'h', 'w'], vec!['b', 'i']]);
        assert_eq!(e.output, vec!['b', 'o', 'i', 'h', 'w']);
        assert!(parse("boihw->bo").is_some());
        // Attention: bci,bcj->bij is MatMul([b,i,c], [b,c,j]).
        let m = matmul_form(&parse("bci,bcj->bij").unwrap()).unwrap();
        assert_eq!((m.perm_a, m.perm_b, m.perm_out), (vec![0, 2, 1], vec![0, 1, 2], vec![0, 1, 2]));
        // bcj,bij->bci is MatMul([b,c,j], [b,j,i]).
        let m = matmul_form(&parse("bcj,bij->bci").unwrap()).unwrap();
        assert_eq!((m.perm_a, m.perm_b, m.perm_out), (vec![0, 1, 2], vec![0, 2, 1], vec![0, 1, 2]));
        // No summed letter, or two: not one MatMul.
        assert!(matmul_form(&parse("oihw,bi->boihw").unwrap()).is_none());
        assert!(matmul_form(&parse("bij,bij->b").unwrap()).is_none());
        for left in ["ii->i", "bij,bjk", "...ij,...jk->...ik", "a,b,c->abc", "ij->ik", "ij->ii"] {
            assert!(parse(left).is_none(), "{left}");
        }
    }
}
