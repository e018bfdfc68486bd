//! The cost report of a compiled campaign: what each circuit costs and the totals, as a table
//! for people and as JSON.
//!
//! In: a [`Plan`] (its circuits' recorded costs; swaps, duration and success probability
//! when it was compiled for a device). Out: the table `compile` prints and the JSON document
//! `compile --json` starts from (every circuit's costs and the totals; schema [`CostDoc`]).
//! Invariant: a function of the plan alone, rows in plan order, fixed number formats and JSON
//! keys in the order the structs declare them, so the report is byte-identical for the same
//! plan.

use super::table::Table;
use crate::plan::{Costs, Part, Plan};
use serde::Serialize;

/// The per-circuit and total cost table.
pub fn cost_table(plan: &Plan) -> String {
    let dev = plan.device.is_some();
    // Control copies of the ancilla (`route::cat`): a column only where a circuit uses them.
    let copies = plan.circuits.iter().any(|e| e.costs.control_copies > 0);
    let mut head = vec![
        "circuit", "k", "time", "part", "depth", "2q depth", "2q gates", "1q gates",
    ];
    if dev {
        head.extend(["swaps", "duration us", "success"]);
    }
    if copies {
        head.push("copies");
    }
    let mut t = Table::new(head);
    let mut tot = Costs::default();
    let (mut dur, mut worst) = (0.0f64, 1.0f64);
    for e in &plan.circuits {
        let c = &e.costs;
        let mut row = vec![
            e.id.clone(),
            e.k.to_string(),
            format!("{:.4}", e.time),
            e.part
                .map_or("-".to_string(), |p| format!("{p:?}").to_lowercase()),
            c.depth.to_string(),
            c.two_qubit_depth.to_string(),
            c.two_qubit.to_string(),
            c.one_qubit.to_string(),
        ];
        if dev {
            row.push(c.swaps.to_string());
            row.push(format!("{:.2}", c.duration_ns.unwrap_or(0.0) / 1000.0));
            row.push(format!("{:.4}", c.success_probability.unwrap_or(1.0)));
        }
        if copies {
            row.push(c.control_copies.to_string());
        }
        t.row(row);
        tot.depth += c.depth;
        tot.two_qubit_depth += c.two_qubit_depth;
        tot.two_qubit += c.two_qubit;
        tot.one_qubit += c.one_qubit;
        tot.swaps += c.swaps;
        dur += c.duration_ns.unwrap_or(0.0);
        worst = worst.min(c.success_probability.unwrap_or(1.0));
    }
    t.rule();
    let mut row = vec![
        "total".to_string(),
        String::new(),
        String::new(),
        String::new(),
        tot.depth.to_string(),
        tot.two_qubit_depth.to_string(),
        tot.two_qubit.to_string(),
        tot.one_qubit.to_string(),
    ];
    if dev {
        row.push(tot.swaps.to_string());
        row.push(format!("{:.2}", dur / 1000.0));
        row.push(format!("min {worst:.4}"));
    }
    if copies {
        let most = plan.circuits.iter().map(|e| e.costs.control_copies).max();
        row.push(format!("max {}", most.unwrap_or(0)));
    }
    t.row(row);
    t.render()
}

/// The most copies of the ancilla one circuit of `plan` sets (0 where the control is not
/// spread).
pub fn most_control_copies(plan: &Plan) -> usize {
    plan.circuits
        .iter()
        .map(|e| e.costs.control_copies)
        .max()
        .unwrap_or(0)
}

/// The cost document `compile --json` starts from: every circuit's costs and the totals.
#[derive(Serialize)]
pub struct CostDoc<'a> {
    /// One entry per circuit, in plan order.
    pub circuits: Vec<CircuitCostDoc<'a>>,
    /// The sums over all circuits.
    pub total: CostTotalDoc,
    /// The caution about estimates from noisy hardware (a sentence).
    pub caution: &'static str,
}

/// One circuit's costs in the cost document.
#[derive(Serialize)]
pub struct CircuitCostDoc<'a> {
    /// Circuit id (its OpenQASM file's stem).
    pub id: &'a str,
    /// Time-point index k (time k·dt).
    pub k: usize,
    /// Evolution time k·dt (inverse energy units, ħ = 1).
    pub time: f64,
    /// Which part of the Hadamard test (`re`, `im`), or null when the circuit has no part.
    pub part: Option<Part>,
    /// The costs the plan records (depth and gate counts; swaps, duration in ns and success
    /// probability on a device).
    pub costs: &'a Costs,
}

/// The totals of the cost document (counts summed over every circuit).
#[derive(Serialize)]
pub struct CostTotalDoc {
    /// Number of circuits.
    pub circuits: usize,
    /// Sum of the circuits' depths (layers).
    pub depth: usize,
    /// Sum of the circuits' two-qubit depths (layers of two-qubit gates).
    pub two_qubit_depth: usize,
    /// Two-qubit gates.
    pub two_qubit: usize,
    /// One-qubit gates.
    pub one_qubit: usize,
    /// SWAPs inserted by routing.
    pub swaps: usize,
    /// The most control copies of the ancilla one circuit sets; omitted when no circuit spreads
    /// the control.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub max_control_copies: Option<usize>,
}

/// The cost document of `plan`.
pub fn cost_doc(plan: &Plan) -> CostDoc<'_> {
    let sum = |f: fn(&Costs) -> usize| plan.circuits.iter().map(|e| f(&e.costs)).sum::<usize>();
    let most = most_control_copies(plan);
    CostDoc {
        circuits: plan
            .circuits
            .iter()
            .map(|e| CircuitCostDoc {
                id: &e.id,
                k: e.k,
                time: e.time,
                part: e.part,
                costs: &e.costs,
            })
            .collect(),
        total: CostTotalDoc {
            circuits: plan.circuits.len(),
            depth: sum(|c| c.depth),
            two_qubit_depth: sum(|c| c.two_qubit_depth),
            two_qubit: sum(|c| c.two_qubit),
            one_qubit: sum(|c| c.one_qubit),
            swaps: sum(|c| c.swaps),
            max_control_copies: (most > 0).then_some(most),
        },
        caution: "estimates depend on the device calibration; validate against trusted methods",
    }
}

/// The cost table as JSON ([`cost_doc`] as a value, keys in the order the structs declare
/// them), for `compile --json` to extend.
pub fn cost_json(plan: &Plan) -> serde_json::Value {
    // Converting to a value fails only for maps with non-string keys; the document has none.
    serde_json::to_value(cost_doc(plan)).expect("the cost document has string keys only")
}
