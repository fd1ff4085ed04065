//! Ligands and edges: inline lists or their own CSV/YAML files, ids checked, the
//! edge network checked for joins.

use super::diagnostic::{Diagnostic, Severity};
use super::fields::{did_you_mean, Ctx};
use super::model::{Edge, Ligand, Vars};
use super::paths::resolve;
use super::safe_id;
use super::tables::{read_csv, row_vars, Row};
use super::yaml::{self, Node, Pos, Value};
use sha2::{Digest, Sha256};
use std::collections::{BTreeMap, HashMap, HashSet};
use std::path::{Path, PathBuf};

/// Where diagnostics of a side file go, and what it adds to the fingerprint.
pub(super) struct Sink<'a> {
    /// diagnostics found in ligand and edge files
    pub extra: &'a mut Vec<Diagnostic>,
    /// the campaign fingerprint
    pub hasher: &'a mut Sha256,
    /// the campaign file's folder
    pub dir: &'a Path,
}

/// A ligand, where it is, and in which file.
type Placed = (Ligand, Pos, PathBuf);

fn table_path(ctx: &mut Ctx, node: &Node, sink: &mut Sink, what: &str) -> Option<PathBuf> {
    let s = ctx.string(node, what)?;
    let p = resolve(sink.dir, Path::new(&s));
    if !p.is_file() {
        ctx.error(
            node.pos,
            format!("{what} file {} does not exist", p.display()),
            Some("give the path relative to the campaign file".to_string()),
        );
        return None;
    }
    if let Ok(bytes) = std::fs::read(&p) {
        sink.hasher.update(&bytes);
    }
    Some(p)
}

/// The ligands, duplicates reported and left out.
pub(super) fn ligands(ctx: &mut Ctx, node: &Node, sink: &mut Sink) -> Vec<Ligand> {
    let mut out: Vec<Placed> = Vec::new();
    match &node.value {
        Value::Str(_) => {
            if let Some(path) = table_path(ctx, node, sink, "ligands") {
                let mut fctx = Ctx::new(&path);
                ligand_file(&mut fctx, &path, &mut out);
                sink.extra.extend(fctx.diags);
            }
        }
        Value::Seq(_) => ligand_list(ctx, node, &mut out),
        _ => ctx.error(
            node.pos,
            format!(
                "ligands must be a list or the path of a CSV/YAML file, not {}",
                node.kind()
            ),
            Some(
                "e.g. ligands: [{ id: lig-1 }, { id: lig-2 }] or ligands: ligands.csv".to_string(),
            ),
        ),
    }
    let ligands = without_duplicates(out, sink.extra);
    if ligands.is_empty() && !ctx.has_errors() && sink.extra.is_empty() {
        ctx.error(
            node.pos,
            "there are no ligands",
            Some("list at least one ligand".to_string()),
        );
    }
    ligands
}

fn without_duplicates(out: Vec<Placed>, extra: &mut Vec<Diagnostic>) -> Vec<Ligand> {
    let mut seen: HashMap<String, (PathBuf, Pos)> = HashMap::new();
    let mut ligands = Vec::new();
    for (lig, pos, file) in out {
        if let Some((f0, p0)) = seen.get(&lig.id) {
            extra.push(Diagnostic {
                severity: Severity::Error,
                file: file.clone(),
                line: pos.line,
                col: pos.col,
                message: format!(
                    "duplicate ligand id '{}' (first at {}:{})",
                    lig.id,
                    f0.display(),
                    p0.line
                ),
                hint: Some("every ligand needs its own id".to_string()),
            });
            continue;
        }
        seen.insert(lig.id.clone(), (file, pos));
        ligands.push(lig);
    }
    ligands
}

fn ligand_file(fctx: &mut Ctx, path: &Path, out: &mut Vec<Placed>) {
    if is_yaml(path) {
        if let Some(root) = read_yaml_file(fctx, path) {
            ligand_list(fctx, &root, out);
        }
        return;
    }
    let Some(rows) = read_csv(fctx, path, &["id"]) else {
        return;
    };
    for row in rows {
        let pos = Pos {
            line: row.line,
            col: 1,
        };
        let Some(id) = cell(&row, "id") else {
            fctx.error(
                pos,
                "this row has no id",
                Some("fill in the id column".to_string()),
            );
            continue;
        };
        if safe_id(fctx, &id, pos, "ligand id") {
            let vars = row_vars(&row, &["id"]);
            out.push((Ligand { id, vars }, pos, path.to_path_buf()));
        }
    }
}

fn cell(row: &Row, name: &str) -> Option<String> {
    row.cells
        .iter()
        .find(|(h, _)| h == name)
        .map(|(_, c)| c.clone())
}

fn is_yaml(path: &Path) -> bool {
    matches!(
        path.extension().and_then(|e| e.to_str()),
        Some("yaml" | "yml")
    )
}

fn read_yaml_file(ctx: &mut Ctx, path: &Path) -> Option<Node> {
    let text = match std::fs::read_to_string(path) {
        Ok(t) => t,
        Err(e) => {
            ctx.error(Pos::default(), format!("cannot read: {e}"), None);
            return None;
        }
    };
    match yaml::parse(&text) {
        Ok(n) => Some(n),
        Err(e) => {
            ctx.error(
                e.pos,
                format!("this is not valid YAML: {}", e.message),
                Some("check indentation, colons after keys and closing brackets".to_string()),
            );
            None
        }
    }
}

fn ligand_list(ctx: &mut Ctx, node: &Node, out: &mut Vec<Placed>) {
    let Some(items) = ctx.list(node, "ligands") else {
        return;
    };
    for item in items {
        let (id, vars) = match &item.value {
            Value::Str(s) => (Some(s.clone()), Vars::default()),
            Value::Map(_) => {
                let Some(f) = ctx.fields(item, "a ligand", &["id", "vars"]) else {
                    continue;
                };
                let id = f
                    .require(ctx, "id", "this ligand", "id: lig-1")
                    .and_then(|n| ctx.string(n, "ligand id"));
                (id, ctx.vars(f.get("vars"), "ligand vars"))
            }
            _ => {
                ctx.error(
                    item.pos,
                    format!(
                        "a ligand must be an id or {{id, vars}}, not {}",
                        item.kind()
                    ),
                    Some("e.g. - id: lig-1".to_string()),
                );
                continue;
            }
        };
        if let Some(id) = id.filter(|id| safe_id(ctx, id, item.pos, "ligand id")) {
            out.push((Ligand { id, vars }, item.pos, ctx.file.clone()));
        }
    }
}

/// An edge as written: each ligand id with its position, and its variables.
type RawEdge = (String, Pos, String, Pos, Vars);

/// The edges, each checked against the ligands.
pub(super) fn edges(
    ctx: &mut Ctx,
    node: &Node,
    ligands: &HashSet<&str>,
    sink: &mut Sink,
) -> Vec<Edge> {
    match &node.value {
        Value::Str(_) => {
            let Some(path) = table_path(ctx, node, sink, "edges") else {
                return Vec::new();
            };
            let mut fctx = Ctx::new(&path);
            let raw = edge_file(&mut fctx, &path);
            let edges = checked_edges(&mut fctx, raw, ligands);
            sink.extra.extend(fctx.diags);
            edges
        }
        Value::Seq(items) => {
            let raw = items.iter().filter_map(|i| edge_item(ctx, i)).collect();
            checked_edges(ctx, raw, ligands)
        }
        _ => {
            ctx.error(
                node.pos,
                format!(
                    "edges must be a list or the path of a CSV file, not {}",
                    node.kind()
                ),
                Some("e.g. edges: [[lig-1, lig-2]] or edges: edges.csv".to_string()),
            );
            Vec::new()
        }
    }
}

fn edge_file(fctx: &mut Ctx, path: &Path) -> Vec<RawEdge> {
    let Some(rows) = read_csv(fctx, path, &["a", "b"]) else {
        return Vec::new();
    };
    let mut raw = Vec::new();
    for row in rows {
        let pos = Pos {
            line: row.line,
            col: 1,
        };
        match (cell(&row, "a"), cell(&row, "b")) {
            (Some(a), Some(b)) => raw.push((a, pos, b, pos, row_vars(&row, &["a", "b"]))),
            _ => fctx.error(
                pos,
                "this edge lacks a or b",
                Some("fill in both ligand ids".to_string()),
            ),
        }
    }
    raw
}

fn edge_item(ctx: &mut Ctx, item: &Node) -> Option<RawEdge> {
    match &item.value {
        Value::Seq(pair) if pair.len() == 2 => {
            let a = ctx.string(&pair[0], "an edge's first ligand");
            let b = ctx.string(&pair[1], "an edge's second ligand");
            Some((a?, pair[0].pos, b?, pair[1].pos, Vars::default()))
        }
        Value::Seq(pair) => {
            ctx.error(
                item.pos,
                format!(
                    "an edge is a pair [a, b] of ligand ids; this one has {} entries",
                    pair.len()
                ),
                Some("e.g. - [lig-1, lig-2]".to_string()),
            );
            None
        }
        Value::Map(_) => {
            let f = ctx.fields(item, "an edge", &["a", "b", "vars"])?;
            let a = f
                .require(ctx, "a", "this edge", "a: lig-1")
                .and_then(|n| ctx.string(n, "edge a").map(|s| (s, n.pos)));
            let b = f
                .require(ctx, "b", "this edge", "b: lig-2")
                .and_then(|n| ctx.string(n, "edge b").map(|s| (s, n.pos)));
            let vars = ctx.vars(f.get("vars"), "edge vars");
            let ((a, pa), (b, pb)) = (a?, b?);
            Some((a, pa, b, pb, vars))
        }
        _ => {
            ctx.error(
                item.pos,
                format!(
                    "an edge must be [a, b] or {{a, b, vars}}, not {}",
                    item.kind()
                ),
                Some("e.g. - [lig-1, lig-2]".to_string()),
            );
            None
        }
    }
}

fn checked_edges(target: &mut Ctx, raw: Vec<RawEdge>, ligands: &HashSet<&str>) -> Vec<Edge> {
    let cands: Vec<&str> = ligands.iter().copied().collect();
    let mut seen: HashMap<(String, String), usize> = HashMap::new();
    let mut edges = Vec::new();
    for (a, pa, b, pb, vars) in raw {
        let mut ok = true;
        for (id, p) in [(&a, pa), (&b, pb)] {
            if !ligands.contains(id.as_str()) {
                let hint = did_you_mean(id, &cands)
                    .map(|c| format!("did you mean '{c}'?"))
                    .unwrap_or_else(|| "add the ligand to ligands, or fix the id".into());
                target.error(p, format!("edge names unknown ligand '{id}'"), Some(hint));
                ok = false;
            }
        }
        if a == b {
            target.error(
                pa,
                format!("edge {a}+{b} joins a ligand to itself"),
                Some("an edge needs two different ligands".to_string()),
            );
            ok = false;
        }
        if !ok {
            continue;
        }
        if let Some(line) = seen.get(&(a.clone(), b.clone())) {
            target.error(
                pa,
                format!("duplicate edge {a}+{b} (first on line {line})"),
                Some("remove the repeated edge".to_string()),
            );
            continue;
        }
        if let Some(line) = seen.get(&(b.clone(), a.clone())) {
            target.warn(
                pa,
                format!("edge {a}+{b} is the reverse of {b}+{a} (line {line}): both will be run"),
                Some(
                    "remove one unless you want the transformation run in both directions"
                        .to_string(),
                ),
            );
        }
        seen.insert((a.clone(), b.clone()), pa.line);
        edges.push(Edge { a, b, vars });
    }
    edges
}

/// A warning when the edges split the ligands into groups that cannot be compared.
pub(super) fn network_warnings(ctx: &mut Ctx, ligands: &[Ligand], edges: &[Edge], pos: Pos) {
    let index: HashMap<&str, usize> = ligands
        .iter()
        .enumerate()
        .map(|(i, l)| (l.id.as_str(), i))
        .collect();
    let mut parent: Vec<usize> = (0..ligands.len()).collect();
    fn find(p: &mut [usize], i: usize) -> usize {
        let mut r = i;
        while p[r] != r {
            r = p[r];
        }
        p[i] = r;
        r
    }
    for e in edges {
        let (a, b) = (index[e.a.as_str()], index[e.b.as_str()]);
        let (ra, rb) = (find(&mut parent, a), find(&mut parent, b));
        parent[ra] = rb;
    }
    let mut groups: BTreeMap<usize, Vec<&str>> = BTreeMap::new();
    for (i, l) in ligands.iter().enumerate() {
        let r = find(&mut parent, i);
        groups.entry(r).or_default().push(&l.id);
    }
    if groups.len() < 2 {
        return;
    }
    let desc: Vec<String> = groups
        .values()
        .map(|g| {
            if g.len() > 4 {
                format!("{{{}, … {} ligands}}", g[..3].join(", "), g.len())
            } else {
                format!("{{{}}}", g.join(", "))
            }
        })
        .collect();
    ctx.warn(
        pos,
        format!(
            "the edge network is disconnected: {} separate groups {}",
            groups.len(),
            desc.join(" ")
        ),
        Some(
            "ligands in different groups cannot be compared; add edges that join them".to_string(),
        ),
    );
}
