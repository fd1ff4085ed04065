//! The `legs:` section: sign, λ schedule, replicas, and each leg's resources,
//! restraint, variables and reader.

use super::fields::{did_you_mean, Ctx, Fields};
use super::lambdas::{check_values, LambdaSchedule, Spacing};
use super::model::Leg;
use super::resources::{resources, restraint};
use super::safe_id;
use super::settings;
use super::yaml::{Node, Pos, Value};

const LEG_KEYS: &[&str] = &[
    "sign",
    "lambdas",
    "replicas",
    "resources",
    "vars",
    "correction",
    "restraint",
    "reader",
    // read by `frames.rs`
    "frames",
    "window_frames",
];

/// Most replicas of one leg.
const MAX_REPLICAS: u32 = 1000;

/// Most λ states of one leg.
const MAX_STATES: usize = 10_000;

/// Every leg, in file order; a leg with an error is left out.
pub(super) fn legs(ctx: &mut Ctx, node: &Node) -> Vec<Leg> {
    let Some(f) = ctx.fields(node, "legs", &[]) else {
        return Vec::new();
    };
    let legs: Vec<Leg> = f
        .iter()
        .filter_map(|(name, leg_node, key_pos)| leg(ctx, name, leg_node, key_pos))
        .collect();
    if legs.is_empty() && !ctx.has_errors() {
        ctx.error(
            node.pos,
            "there are no legs",
            Some("define at least one leg, e.g. legs: { complex: {…} }".to_string()),
        );
    }
    legs
}

fn leg(ctx: &mut Ctx, name: &str, node: &Node, key_pos: Pos) -> Option<Leg> {
    let named_ok = safe_id(ctx, name, key_pos, "leg name");
    let what = format!("leg '{name}'");
    let lf = ctx.fields(node, &what, LEG_KEYS)?;
    let sign = sign(ctx, &lf, &what);
    let lambdas = lf
        .require(
            ctx,
            "lambdas",
            &what,
            "lambdas: { count: 12, spacing: linear }",
        )
        .and_then(|n| lambdas(ctx, n, &what));
    let replicas = lf.get("replicas").map_or(1, |n| replicas(ctx, n, &what));
    let resources = resources(ctx, lf.get("resources"), &what);
    let vars = ctx.vars(lf.get("vars"), &format!("vars of {what}"));
    let correction = lf
        .get("correction")
        .and_then(|n| ctx.number(n, &format!("correction of {what}")));
    let restraint = lf.get("restraint").and_then(|n| restraint(ctx, n, &what));
    let reader = lf
        .get("reader")
        .and_then(|n| settings::reader(ctx, n, &format!("reader of {what}")));
    let lambdas = lambdas.filter(|_| named_ok)?;
    let frames = super::frames::leg_frames(ctx, &lf, &what, lambdas.count());
    Some(Leg {
        name: name.to_string(),
        sign,
        lambdas,
        replicas,
        resources,
        vars,
        correction,
        restraint,
        reader,
        frames,
    })
}

fn sign(ctx: &mut Ctx, lf: &Fields, what: &str) -> i32 {
    let Some(n) = lf.require(ctx, "sign", what, "sign: 1 (or -1)") else {
        return 1;
    };
    match &n.value {
        Value::Int(1) => 1,
        Value::Int(-1) => -1,
        _ => {
            ctx.error(
                n.pos,
                format!("sign of {what} must be 1 or -1, not {}", n.key_text()),
                Some("+1 adds the leg's ΔG to the cycle, -1 subtracts it".to_string()),
            );
            1
        }
    }
}

fn replicas(ctx: &mut Ctx, n: &Node, what: &str) -> u32 {
    let name = format!("replicas of {what}");
    match ctx.typed::<u32>(n, &name) {
        Some(0) => {
            ctx.error(
                n.pos,
                format!("replicas of {what} must be a whole number ≥ 1, not 0"),
                Some("e.g. replicas: 3".to_string()),
            );
            1
        }
        Some(r) => ctx.in_range(n, &name, r, 1, MAX_REPLICAS).unwrap_or(1),
        None => 1,
    }
}

fn number_list(ctx: &mut Ctx, node: &Node, what: &str) -> Option<(Vec<f64>, Vec<Pos>)> {
    let items = ctx.list(node, what)?;
    let mut vals = Vec::new();
    let mut poss = Vec::new();
    let mut ok = true;
    for it in items {
        match ctx.number(it, &format!("each λ of {what}")) {
            Some(v) => {
                vals.push(v);
                poss.push(it.pos);
            }
            None => ok = false,
        }
    }
    ok.then_some((vals, poss))
}

fn report_values(
    ctx: &mut Ctx,
    vals: &[f64],
    poss: &[Pos],
    list_pos: Pos,
    strict: bool,
    what: &str,
) -> bool {
    let problems = check_values(vals, strict);
    for (i, msg, hint) in &problems {
        let pos = i.map(|i| poss[i]).unwrap_or(list_pos);
        ctx.error(
            pos,
            format!("{msg} (λ schedule of {what})"),
            Some(hint.clone()),
        );
    }
    problems.is_empty()
}

fn lambdas(ctx: &mut Ctx, node: &Node, what: &str) -> Option<LambdaSchedule> {
    match &node.value {
        Value::Seq(_) => {
            let (vals, poss) = number_list(ctx, node, &format!("lambdas of {what}"))?;
            if vals.len() > MAX_STATES {
                ctx.error(
                    node.pos,
                    format!("lambdas of {what} has {} states", vals.len()),
                    Some(format!("use at most {MAX_STATES} states")),
                );
                return None;
            }
            report_values(ctx, &vals, &poss, node.pos, true, what)
                .then(|| LambdaSchedule::single(vals))
        }
        Value::Map(entries)
            if entries
                .iter()
                .any(|(k, _)| k.as_str() == Some("components")) =>
        {
            let f = ctx.fields(node, &format!("lambdas of {what}"), &["components"])?;
            components(ctx, f.get("components")?, what)
        }
        Value::Map(_) => spaced(ctx, node, what),
        _ => {
            ctx.error(
                node.pos,
                format!("lambdas of {what} must be a list, {{count, spacing}} or {{components}}, not {}", node.kind()),
                Some("e.g. lambdas: [0, 0.25, 0.5, 0.75, 1] or lambdas: { count: 12, spacing: ends }".to_string()),
            );
            None
        }
    }
}

/// `components: { name: [values…], … }`: aligned lists, one value per state.
fn components(ctx: &mut Ctx, comps: &Node, what: &str) -> Option<LambdaSchedule> {
    let cf = ctx.fields(comps, &format!("λ components of {what}"), &[])?;
    let mut names = Vec::new();
    let mut values: Vec<Vec<f64>> = Vec::new();
    let mut ok = true;
    for (name, list, kpos) in cf.iter() {
        ok &= safe_id(ctx, name, kpos, "λ component name");
        let Some((vals, poss)) = number_list(ctx, list, &format!("component '{name}' of {what}"))
        else {
            ok = false;
            continue;
        };
        if let (Some(first), Some(n)) = (names.first(), values.first().map(Vec::len)) {
            if n != vals.len() {
                ctx.error(
                    list.pos,
                    format!(
                        "λ component '{name}' of {what} has {} values but '{first}' has {n}",
                        vals.len()
                    ),
                    Some("components are aligned lists: one value per state in each".to_string()),
                );
                ok = false;
                continue;
            }
        }
        let each = format!("{what}, component '{name}'");
        ok &= report_values(ctx, &vals, &poss, list.pos, false, &each);
        names.push(name.to_string());
        values.push(vals);
    }
    if names.is_empty() {
        ctx.error(
            comps.pos,
            format!("λ components of {what} are empty"),
            Some("e.g. components: { charge: [0, 1, 1], vdw: [0, 0, 1] }".to_string()),
        );
        return None;
    }
    let first_list = cf.iter().next().map_or(comps.pos, |(_, l, _)| l.pos);
    if ok && !states_distinct(ctx, &values, first_list, what) {
        ok = false;
    }
    ok.then_some(LambdaSchedule {
        components: names,
        values,
    })
}

/// Every pair of neighbouring states differs in at least one component.
fn states_distinct(ctx: &mut Ctx, values: &[Vec<f64>], pos: Pos, what: &str) -> bool {
    let mut ok = true;
    for k in 1..values[0].len() {
        if values.iter().all(|v| v[k] == v[k - 1]) {
            ctx.error(
                pos,
                format!(
                    "states {} and {k} of {what} are the same in every component",
                    k - 1
                ),
                Some("remove one of the repeated states".to_string()),
            );
            ok = false;
        }
    }
    ok
}

/// `{ count: N, spacing: linear | ends }`.
fn spaced(ctx: &mut Ctx, node: &Node, what: &str) -> Option<LambdaSchedule> {
    let w = format!("lambdas of {what}");
    let f = ctx.fields(node, &w, &["count", "spacing"])?;
    let count = f
        .require(ctx, "count", &w, "count: 12")
        .and_then(|n| ctx.typed::<usize>(n, "λ count"));
    let spacing = match f.get("spacing") {
        None => Some(Spacing::Linear),
        Some(n) => spacing(ctx, n),
    };
    let count = count?;
    let count_pos = f.get("count").map_or(node.pos, |n| n.pos);
    if count < 2 {
        ctx.error(
            count_pos,
            format!("a λ schedule needs at least 2 states, count is {count}"),
            Some("use count: 2 or more".to_string()),
        );
        return None;
    }
    if count > MAX_STATES {
        ctx.error(
            count_pos,
            format!("λ count {count} is implausibly large"),
            Some(format!("use at most {MAX_STATES} states")),
        );
        return None;
    }
    Some(LambdaSchedule::spaced(count, spacing?))
}

fn spacing(ctx: &mut Ctx, n: &Node) -> Option<Spacing> {
    match ctx.string(n, "spacing").as_deref() {
        Some("linear") => Some(Spacing::Linear),
        Some("ends") => Some(Spacing::Ends),
        Some(other) => {
            let hint = did_you_mean(other, &["linear", "ends"])
                .map(|s| format!("did you mean '{s}'?"))
                .unwrap_or_else(|| "use linear or ends (denser near 0 and 1)".into());
            ctx.error(n.pos, format!("unknown λ spacing '{other}'"), Some(hint));
            None
        }
        None => None,
    }
}
